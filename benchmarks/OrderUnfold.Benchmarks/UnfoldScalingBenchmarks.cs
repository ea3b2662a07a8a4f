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

    private sealed class Marks(Action<string> action) : IProgress<string>
    {
        public void Report(string value) => action(value);
    }
}
