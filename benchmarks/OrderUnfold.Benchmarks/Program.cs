using BenchmarkDotNet.Running;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// Entry point. <c>dotnet run -c Release --project benchmarks/OrderUnfold.Benchmarks -- --filter '*'</c> runs the
/// BenchmarkDotNet suite; <c>-- --cpu-time</c> runs <see cref="CpuTimeProbe"/> (CPU time next to wall time);
/// <c>-- --cpu-time-refine</c> only its line-refinement part (the nine-mode comb of <see cref="RefineCombBenchmark"/>).
/// </summary>
public static class Program
{
    public static void Main(string[] args)
    {
        if (args.Length == 1 && args[0] == "--cpu-time-refine")
        {
            CpuTimeProbe.RunRefinement(Console.Out);
            return;
        }

        if (args.Length == 1 && args[0] == "--cpu-time")
        {
            CpuTimeProbe.Run(Console.Out);
            return;
        }

        BenchmarkSwitcher.FromAssembly(typeof(Program).Assembly).Run(args);
    }
}
