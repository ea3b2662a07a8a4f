using BenchmarkDotNet.Attributes;
using BenchmarkDotNet.Configs;
using BenchmarkDotNet.Jobs;
using OrderUnfold.Pipeline.Batch;
using OrderUnfold.Simulation;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// Items per second of <c>orderunfold batch</c> on the simulated demo archive (single-sweep items of 2 500
/// samples, one reused calibration file, plots off, the laser-mode columns filled as the command line does), with
/// 1 and 2 jobs. Items/s = <see cref="Items"/> ÷ mean time. Each iteration starts from an empty output folder, so
/// every item is run (none is skipped). Dynamic PGO is off, as in the command line's runtime configuration.
/// </summary>
[MemoryDiagnoser]
[Config(typeof(Settings))]
public class BatchBenchmark
{
    /// <summary>Items in the archive (the defects of the demo archive are kept: five of them fail fast).</summary>
    public const int Items = 100;

    private string _root = "";
    private string _manifest = "";
    private string _out = "";

    [Params(1, 2)]
    public int Jobs { get; set; }

    [GlobalSetup]
    public void Setup()
    {
        _root = Path.Combine(Path.GetTempPath(), "ou-batch-bench-" + Guid.NewGuid().ToString("N")[..8]);
        var spec = new ArchiveSpec { Items = Items, Laser = new ArchiveLaser { HopAt = Items * 3 / 5 }, Defects = new ArchiveSpec().Defects.Where(d => d.Key < Items).ToDictionary() };
        _manifest = DemoArchive.Write(Path.Combine(_root, "archive"), spec).ManifestPath;
    }

    [IterationSetup]
    public void FreshOutput()
    {
        _out = Path.Combine(_root, "out-" + Guid.NewGuid().ToString("N")[..8]);
    }

    [Benchmark]
    public BatchResult Batch() => BatchRunner.Run(_manifest, _out, new BatchOptions { Jobs = Jobs, Analysis = ModeItemAnalysis.Instance });

    [IterationCleanup]
    public void RemoveOutput()
    {
        if (Directory.Exists(_out)) Directory.Delete(_out, recursive: true);
    }

    [GlobalCleanup]
    public void Cleanup()
    {
        if (Directory.Exists(_root)) Directory.Delete(_root, recursive: true);
    }
}

/// <summary>One launch, one warm-up and five measured iterations; DOTNET_TieredPGO=0 as the command line runs.</summary>
public sealed class Settings : ManualConfig
{
    public Settings() =>
        AddJob(Job.Default
            .WithLaunchCount(1)
            .WithWarmupCount(1)
            .WithIterationCount(5)
            .WithEnvironmentVariables(new EnvironmentVariable("DOTNET_TieredPGO", "0"))
            .WithId("pgo-off"));
}
