using System.Diagnostics;
using System.Globalization;
using OrderUnfold.Inversion;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// A plain timing pass that reports process CPU time next to wall time (<c>-- --cpu-time</c>). BenchmarkDotNet states
/// wall time, which on a machine shared with other busy processes counts the time this process waited for a core;
/// CPU time counts only the time it ran. Pinned to one core like the benchmark job. Same cases as the benchmarks.
/// </summary>
public static class CpuTimeProbe
{
    private static double CpuMs() => Process.GetCurrentProcess().TotalProcessorTime.TotalMilliseconds;

    private static void Measure(TextWriter o, string what, int repetitions, Action action)
    {
        action(); // JIT and caches
        var cpu0 = CpuMs();
        var wall = Stopwatch.StartNew();
        for (var i = 0; i < repetitions; i++) action();
        var w = wall.Elapsed.TotalMilliseconds / repetitions;
        var c = (CpuMs() - cpu0) / repetitions;
        o.WriteLine(string.Create(CultureInfo.InvariantCulture, $"| {what,-58} | {w,10:F3} | {c,10:F3} |"));
    }

    /// <summary>CPU time of the line refinement on the nine-mode, two-cavity comb (2 × 40 000 samples), sparse and dense
    /// Gauss–Newton matrix, pinned to one core.</summary>
    public static void RunRefinement(TextWriter o)
    {
        try
        {
            if (OperatingSystem.IsLinux() || OperatingSystem.IsWindows()) Process.GetCurrentProcess().ProcessorAffinity = 1;
            else throw new PlatformNotSupportedException();
        }
        catch (PlatformNotSupportedException)
        {
            o.WriteLine("(could not pin to one core)");
        }

        var b = new RefineCombBenchmark();
        b.Setup();
        o.WriteLine("| operation                                                  |    wall ms |     CPU ms |");
        o.WriteLine("|------------------------------------------------------------|-----------:|-----------:|");
        Measure(o, "refinement, 9-mode comb, 2 × 40 000 samples (sparse)", 3, () => b.RefineNineModeComb());
        Measure(o, "refinement, 9-mode comb, 2 × 40 000 samples (dense)", 3, () => b.RefineNineModeCombDense());
    }

    public static void Run(TextWriter o)
    {
        try
        {
            if (OperatingSystem.IsLinux() || OperatingSystem.IsWindows()) Process.GetCurrentProcess().ProcessorAffinity = 1;
            else throw new PlatformNotSupportedException();
        }
        catch (PlatformNotSupportedException)
        {
            o.WriteLine("(could not pin to one core)");
        }

        o.WriteLine("| operation                                                  |    wall ms |     CPU ms |");
        o.WriteLine("|------------------------------------------------------------|-----------:|-----------:|");
        foreach (var samples in new[] { 5_000, 20_000, 80_000 })
        {
            var c = SimulatedCase.TwoCavities(samples);
            foreach (var bins in new[] { 2_500, 5_000, 10_000, 20_000 })
            {
                var b = new OperatorBenchmarks { Bins = bins, SamplesPerSweep = samples };
                b.Setup();
                Measure(o, $"G x (NormalProduct), {bins} bins, 2 × {samples} samples", 200, () => b.NormalProduct());
                Measure(o, $"A x then Aᵀ r, {bins} bins, 2 × {samples} samples", 100, () => b.ForwardThenAdjoint());
            }
        }

        var s = new SolverBenchmarks { SamplesPerSweep = 20_000, Bins = 10_000 };
        s.Setup();
        Measure(o, "NNLS at known offsets (set-up + solve), 10 000 bins", 10, () => s.NnlsKnownOffsets());
        Measure(o, "NNLS solve only, 10 000 bins", 10, () => s.NnlsSolveOnly());
        Measure(o, "Unfolder.Run, 2 × 20 000 samples, 10 000 bins", 3, () => s.UnfolderRun());

        // the batch (as BatchBenchmark, one job): per item, after one warm-up batch
        var batch = new BatchBenchmark { Jobs = 1 };
        batch.Setup();
        Measure(o, $"batch of {BatchBenchmark.Items} archive items, 1 job (whole batch)", 3, () =>
        {
            batch.FreshOutput();
            batch.Batch();
            batch.RemoveOutput();
        });
        batch.Cleanup();

        // where the unfolder's time goes: CPU time at each progress report
        var c2 = SimulatedCase.TwoCavities(20_000);
        var grid = c2.Grid(10_000);
        var stages = new StageClock();
        Unfolder.Run(c2.Sweeps, new UnfoldOptions { WindowStartHz = grid.StartHz, WindowEndHz = grid.EndHz }, stages);
        stages.Report("end");
        o.WriteLine();
        o.WriteLine("Unfolder.Run stages (CPU ms since the start of the run):");
        foreach (var (at, stage) in stages.Marks) o.WriteLine(string.Create(CultureInfo.InvariantCulture, $"  {at,8:F0} ms  {stage}"));
    }

    private sealed class StageClock : IProgress<string>
    {
        private readonly double _start = CpuMs();

        public List<(double At, string Stage)> Marks { get; } = [];

        public void Report(string value) => Marks.Add((CpuMs() - _start, value));
    }
}
