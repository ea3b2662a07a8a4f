using BenchmarkDotNet.Attributes;
using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// The line refinement on a nine-mode comb seen by two cavities, 2 × 40 000 samples (SIMULATED DATA: a multimode diode
/// laser, modes 48.7 GHz apart under a Gaussian envelope, seen by planar cavities of FSR 10.0 and 7.3 GHz, finesse 100,
/// each sweep over 4 FSR with a linear scan axis, white noise σ = 0.004 of the strongest mode). The refinement starts
/// from the truth moved by 0.05 linewidth (a hand-made grid result, as in <see cref="CrbStudy"/>), with the order check
/// (4 alias candidates per line) and the default budgets. Run with
/// <c>dotnet run -c Release --project benchmarks/OrderUnfold.Benchmarks -- --filter '*RefineCombBenchmark*'</c>.
/// </summary>
[Config(typeof(QuickConfig))]
public class RefineCombBenchmark
{
    private CombCase _case = null!;

    [GlobalSetup]
    public void Setup()
    {
        _case = CombCase.Make(40_000);
        var (result, diag) = LineRefiner.Refine(_case.Sweeps, _case.Grid);
        Console.WriteLine($"// comb refinement: {result.Lines.Count} lines, {diag.IterationsUsed} iterations, {diag.Groups} group(s), " +
                          $"budget {(diag.BudgetExhausted ?? "not reached")}, reduced χ² {diag.ReducedChiSquare:F3}, CPU {diag.CpuSeconds:F2} s");
    }

    /// <summary>The whole refinement: line fit rounds, covariance, order check, detection limit.</summary>
    [Benchmark]
    public int RefineNineModeComb() => LineRefiner.Refine(_case.Sweeps, _case.Grid).Result.Lines.Count;

    /// <summary>The same with the dense Gauss–Newton matrix (every line in every sample's row; one group).</summary>
    [Benchmark]
    public int RefineNineModeCombDense() =>
        LineRefiner.Refine(_case.Sweeps, _case.Grid, new RefineOptions { JacobianCutoffLinewidths = double.PositiveInfinity }).Result.Lines.Count;
}

/// <summary>The simulated comb case of <see cref="RefineCombBenchmark"/>: sweeps, the grid result to refine, the true modes.</summary>
public sealed record CombCase(List<CalibratedSweep> Sweeps, UnfoldResult Grid, (double Hz, double A)[] Modes)
{
    public static CombCase Make(int samples, int seed = 8)
    {
        var rng = new Random(seed);
        var modes = Enumerable.Range(-4, 9).Select(m => (Hz: m * 48.7e9, A: Math.Exp(-0.5 * m * m / 4.0))).ToArray();
        var specs = new[]
        {
            (Inst: new Instrument("cav10", 10.0e9, 100), Offset: 0.0, Gain: 1.0, Bg: 0.02),
            (Inst: new Instrument("cav7p3", 7.3e9, 100), Offset: 1.9e9, Gain: 0.8, Bg: 0.05),
        };
        var sweeps = new List<CalibratedSweep>();
        foreach (var s in specs)
        {
            var scan = new double[samples];
            var y = new double[samples];
            for (var i = 0; i < samples; i++)
            {
                scan[i] = 4 * s.Inst.FsrHz * i / samples;
                var v = 0.0;
                foreach (var (hz, a) in modes) v += a * s.Inst.Transmission(hz - s.Offset - scan[i]);
                y[i] = s.Gain * v + s.Bg + 0.004 * Simulator.Gaussian(rng);
            }

            sweeps.Add(new CalibratedSweep(s.Inst.Name, s.Inst, scan, y, 0.004));
        }

        // grid result: modes at the truth moved by ±0.05 linewidth, frequencies relative to the strongest (m = 0)
        var lw = specs.Min(s => s.Inst.LinewidthHz);
        var guesses = modes.Select((m, j) => (Hz: m.Hz + (j % 2 == 0 ? 0.05 : -0.05) * lw, A: m.A * (j % 2 == 0 ? 1.02 : 0.97))).ToArray();
        var anchor = guesses[4];
        var grid = FrequencyGrid.Covering(-220e9 - anchor.Hz, 220e9 - anchor.Hz, lw / 4);
        var spectrum = new double[grid.Count];
        var lines = new List<UnfoldedLine>();
        foreach (var g in guesses)
        {
            var rel = g.Hz - anchor.Hz;
            var bin = Math.Clamp((int)Math.Round((rel - grid.StartHz) / grid.StepHz), 0, grid.Count - 1);
            spectrum[bin] = g.A / anchor.A;
            lines.Add(new UnfoldedLine(rel, g.A / anchor.A, g.A, 100, bin, bin));
        }

        var fits = sweeps.Select((s, k) => new SweepFit(s.Name, s.Instrument.Name, specs[k].Offset - anchor.Hz, specs[k].Gain / specs[0].Gain,
            specs[k].Bg, s.NoiseSigma, samples, 1, s.NoiseSigma, samples)).ToList();
        var result = new UnfoldResult
        {
            Grid = grid,
            Spectrum = spectrum,
            Lines = lines,
            Sweeps = fits,
            Solver = new NnlsResult(spectrum, 0, 0, SolverStatus.Converged, "hand-made grid result (comb benchmark)", 0, lines.Count),
            OrdersResolved = true,
            UnambiguousRangeHz = 440e9,
        };
        return new CombCase(sweeps, result, modes);
    }
}
