using BenchmarkDotNet.Columns;
using BenchmarkDotNet.Configs;
using BenchmarkDotNet.Diagnosers;
using BenchmarkDotNet.Jobs;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// Few iterations (1 launch, 1 warm-up, 5 measured) so that the whole suite finishes in minutes on a shared
/// two-core machine, pinned to one core (affinity mask 1) because the target is stated for one core.
/// </summary>
public sealed class QuickConfig : ManualConfig
{
    public QuickConfig()
    {
        AddJob(Job.Default
            .WithLaunchCount(1)
            .WithWarmupCount(1)
            .WithIterationCount(5)
            .WithAffinity(1)
            .WithId("1core-short"));
        AddDiagnoser(MemoryDiagnoser.Default);
        AddColumn(StatisticColumn.Min, StatisticColumn.Max);
        WithOptions(ConfigOptions.DisableOptimizationsValidator);
    }
}
