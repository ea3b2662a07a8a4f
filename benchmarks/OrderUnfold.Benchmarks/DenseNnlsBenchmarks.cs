using BenchmarkDotNet.Attributes;
using OrderUnfold.Inversion;


namespace OrderUnfold.Benchmarks;

/// <summary>
/// Dense-support NNLS (<see cref="DenseSupportCase"/>: a broadband simulated source, no L1 weight, most bins active)
/// at 4k×1k, 8k×2k and 16k×4k (samples × bins): the dense solver, and the active-set solver at the smallest size for
/// the side-by-side ratio. The same problems, exported with <c>--export-dense</c>, are solved by scipy in
/// tests/reference/dense_nnls_reference.py.
/// </summary>
[Config(typeof(QuickConfig))]
public class DenseNnlsBenchmarks
{
    public static readonly (int Rows, int Bins)[] Sizes = [(4000, 1000), (8000, 2000), (16000, 4000)];

    private UnfoldProblem _problem = null!;

    [Params(1000, 2000, 4000)]
    public int Bins { get; set; }

    [GlobalSetup]
    public void Setup() => _problem = DenseSupportCase.Create(4 * Bins, Bins).Problem();

    /// <summary>The dense-support solver.</summary>
    [Benchmark]
    public int Dense() => DenseNnls.Solve(_problem).ActiveCount;

    /// <summary>
    /// CPU-time probe of the dense solver on the three sizes (one core, process CPU time, after one untimed solve of the
    /// smallest size), printing the objective
    /// ½‖Ax − y‖² (whitened) that the scipy reference reports, the active count and the KKT violation; with
    /// <paramref name="withActiveSet"/> also the active-set solver (slow at the larger sizes).
    /// </summary>
    public static void Probe(TextWriter output, bool withActiveSet) => Probe(output, withActiveSet, "standard");

    /// <summary>The window of a family's problem with <paramref name="bins"/> bins, in quarter linewidths (see
    /// <see cref="Probe(TextWriter, bool, string)"/>).</summary>
    public static int FamilyWindow(string family, int bins) => family switch
    {
        "standard" => bins,
        "fine" => Sizes[0].Bins,
        "wide" => Sizes[^1].Bins,
        _ => throw new ArgumentException($"unknown family '{family}' (standard, fine, wide)", nameof(family)),
    };

    /// <summary>
    /// The probe on one family of the three sizes (samples 4k / 8k / 16k, bins 1k / 2k / 4k): <c>standard</c> (step a
    /// quarter linewidth, the window grows with the bins: 2.5 / 5 / 10 GHz), <c>fine</c> (the window fixed at the
    /// smallest case's 2.5 GHz, step 2.5 / 1.25 / 0.625 MHz) or <c>wide</c> (the window fixed at the largest case's
    /// 10 GHz, step 10 / 5 / 2.5 MHz).
    /// </summary>
    public static void Probe(TextWriter output, bool withActiveSet, string family)
    {
        int Window(int bins) => FamilyWindow(family, bins);

        using var process = System.Diagnostics.Process.GetCurrentProcess();
        if (OperatingSystem.IsLinux() || OperatingSystem.IsWindows()) process.ProcessorAffinity = 1;
        // one untimed solve of the smallest problem first, so that the first row does not carry the JIT compilation
        DenseNnls.Solve(DenseSupportCase.Create(Sizes[0].Rows, Sizes[0].Bins, Window(Sizes[0].Bins)).Problem());
        output.WriteLine($"family {family}: window {Window(1000)}/{Window(2000)}/{Window(4000)} quarter linewidths");
        output.WriteLine("rows\tbins\tsolver\tcpu_s\twall_s\tobjective\tactive\tkkt\ttolerance\tproducts\tstatus\tmessage");
        foreach (var (rows, bins) in Sizes)
        {
            var c = DenseSupportCase.Create(rows, bins, Window(bins));
            var problem = c.Problem();
            void Run(string name, Func<NnlsResult> solve)
            {
                process.Refresh();
                var cpu0 = process.TotalProcessorTime;
                var wall = System.Diagnostics.Stopwatch.StartNew();
                var r = solve();
                wall.Stop();
                process.Refresh();
                var cpu = (process.TotalProcessorTime - cpu0).TotalSeconds;
                output.WriteLine($"{rows}\t{bins}\t{name}\t{cpu:F3}\t{wall.Elapsed.TotalSeconds:F3}\t{c.Objective(problem, r.Solution):R}\t{r.ActiveCount - 2}\t{r.KktViolation:G3}\t{r.Tolerance:G3}\t{r.Products}\t{r.Status}\t{r.Message}");
            }

            Run("dense", () => DenseNnls.Solve(problem));
            // the preconditioner's set-up alone (Toeplitz model and Durbin's recursion), part of the solve above
            process.Refresh();
            var setup0 = process.TotalProcessorTime;
            ToeplitzPreconditioner.TryCreate(problem, out _);
            process.Refresh();
            output.WriteLine($"{rows}\t{bins}\tpreconditioner set-up\t{(process.TotalProcessorTime - setup0).TotalSeconds:F3}");
            if (withActiveSet) Run("active-set", () => ActiveSetNnls.Solve(problem, new ActiveSetNnls.Options { MaxIterations = 100_000 }));
        }
    }
}
