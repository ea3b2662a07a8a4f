using BenchmarkDotNet.Attributes;
using OrderUnfold.Inversion;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// The whole <see cref="Unfolder.Run"/> (offset search, joint solve with gain/offset refits, line extraction) on the
/// benchmark case of <see cref="SimulatedCase"/> (two sweeps of 20 000 samples, six lines; SIMULATED DATA) with an
/// explicit window of 10⁴, 10⁵ and 10⁶ bins at the default step (a quarter linewidth, 2.5 MHz: 25 GHz to 2.5 THz).
/// </summary>
[Config(typeof(QuickConfig))]
public class UnfoldScalingBenchmarks
{
    public static readonly int[] BinCounts = [10_000, 100_000, 1_000_000];

    private SimulatedCase _case = null!;
    private UnfoldOptions _options = null!;

    [Params(10_000, 100_000, 1_000_000)]
    public int Bins { get; set; }

    [GlobalSetup]
    public void Setup()
    {
        _case = SimulatedCase.TwoCavities(20_000);
        var grid = _case.Grid(Bins);
        _options = new UnfoldOptions { WindowStartHz = grid.StartHz, WindowEndHz = grid.EndHz };
    }

    [Benchmark]
    public int UnfolderRun() => Unfolder.Run(_case.Sweeps, _options).Lines.Count;

    /// <summary>CPU-time probe: the whole unfold at each size, and the share of the offset search (from the progress
    /// marks "finding sweep offsets" to "solving NNLS on all sweeps"), one core, after one untimed warm-up unfold. With
    /// <paramref name="marks"/> every progress mark is printed with the CPU time since the unfold began.</summary>
    public static void Probe(TextWriter output, bool marks = false)
    {
        using var process = System.Diagnostics.Process.GetCurrentProcess();
        if (OperatingSystem.IsLinux() || OperatingSystem.IsWindows()) process.ProcessorAffinity = 1;
        output.WriteLine("bins\tcpu_s\twall_s\toffset_search_cpu_s\tshare\tlines\tsolver");
        var c = SimulatedCase.TwoCavities(20_000);
        // one untimed unfold first, so that the first size does not carry the JIT compilation (BenchmarkDotNet warms up too)
        var warm = c.Grid(BinCounts[0]);
        Unfolder.Run(c.Sweeps, new UnfoldOptions { WindowStartHz = warm.StartHz, WindowEndHz = warm.EndHz });
        foreach (var bins in BinCounts)
        {
            var grid = c.Grid(bins);
            var options = new UnfoldOptions { WindowStartHz = grid.StartHz, WindowEndHz = grid.EndHz };
            TimeSpan Cpu()
            {
                process.Refresh();
                return process.TotalProcessorTime;
            }

            TimeSpan? searchStart = null, searchEnd = null;
            var cpuStart = TimeSpan.Zero;
            var progress = new Marks(m =>
            {
                if (marks) output.WriteLine($"#\t{(Cpu() - cpuStart).TotalSeconds:F3}\t{m}");
                if (m == "finding sweep offsets") searchStart = Cpu();
                if (m == "solving NNLS on all sweeps") searchEnd = Cpu();
            });
            var cpu0 = Cpu();
            cpuStart = cpu0;
            var wall = System.Diagnostics.Stopwatch.StartNew();
            var r = Unfolder.Run(c.Sweeps, options, progress);
            wall.Stop();
            var cpu = (Cpu() - cpu0).TotalSeconds;
            var search = searchStart is { } a && searchEnd is { } b ? (b - a).TotalSeconds : double.NaN;
            output.WriteLine($"{bins}\t{cpu:F3}\t{wall.Elapsed.TotalSeconds:F3}\t{search:F3}\t{search / cpu:P0}\t{r.Lines.Count}\t{r.Solver.Method}");
        }
    }

    /// <summary>One L1-weighted NNLS solve at the true offsets and gains at each size, with a whole pass over the grid in
    /// every iteration and with the working set (<see cref="ActiveSetNnls.Options.WorkingSetFraction"/>): iterations, active
    /// entries, KKT violation, CPU time and the objective ½xᵀGx − bᵀx, whose difference must stay within the convexity
    /// bound max(ε₁, ε₂)·(‖x₁‖₁ + ‖x₂‖₁).</summary>
    public static void WorkingSetProbe(TextWriter output)
    {
        using var process = System.Diagnostics.Process.GetCurrentProcess();
        if (OperatingSystem.IsLinux() || OperatingSystem.IsWindows()) process.ProcessorAffinity = 1;
        var c = SimulatedCase.TwoCavities(20_000);
        output.WriteLine("bins\tmode\titerations\tactive\tkkt\tcpu_s\tobjective\t|difference|\tbound");
        foreach (var bins in BinCounts)
        {
            var grid = c.Grid(bins);
            var lambda = c.L1Weight(grid);
            var problem = new UnfoldProblem(c.Sweeps, grid, c.OffsetsHz, c.Gains, lambda, 0, c.PeriodicStepHz(grid));
            var options = new ActiveSetNnls.Options { Tolerance = 1e-3 * lambda, MaxIterations = 5000 };
            double Objective(double[] x) => NnlsResult.ObjectiveOf(problem, x);

            NnlsResult Timed(ActiveSetNnls.Options o, out double cpu)
            {
                process.Refresh();
                var t0 = process.TotalProcessorTime;
                var r = ActiveSetNnls.Solve(problem, o);
                process.Refresh();
                cpu = (process.TotalProcessorTime - t0).TotalSeconds;
                return r;
            }

            var whole = Timed(options with { WorkingSetFraction = 0 }, out var cpuWhole);
            var working = Timed(options with { WorkingSetMinEntries = 0 }, out var cpuWorking);
            var f1 = Objective(whole.Solution);
            var f2 = Objective(working.Solution);
            var bound = Math.Max(whole.KktViolation, working.KktViolation) * (whole.Solution.Sum(Math.Abs) + working.Solution.Sum(Math.Abs));
            output.WriteLine($"{bins}\twhole\t{whole.Iterations}\t{whole.ActiveCount}\t{whole.KktViolation:G3}\t{cpuWhole:F3}\t{f1:R}");
            output.WriteLine($"{bins}\tworking\t{working.Iterations}\t{working.ActiveCount}\t{working.KktViolation:G3}\t{cpuWorking:F3}\t{f2:R}\t{Math.Abs(f1 - f2):G3}\t{bound:G3}");
        }
    }

    private sealed class Marks(Action<string> action) : IProgress<string>
    {
        public void Report(string value) => action(value);
    }
}
