using System.Globalization;
using System.Text;
using BenchmarkDotNet.Attributes;
using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// Accuracy study of the line refinement against the Cramér–Rao bound, plus the time of one refinement.
/// <see cref="Setup"/> runs <see cref="CrbStudy.Run"/> once (simulated sweeps, many noise realisations per case) and
/// prints the table (RMS position error, mean CRB, their ratio) and writes it to the file named by the environment
/// variable ORDERUNFOLD_CRB_TABLE (default: orderunfold-crb-table.md in the temp folder). Run with
/// <c>dotnet run -c Release --project benchmarks/OrderUnfold.Benchmarks -- --filter '*CrbBenchmark*'</c>.
/// </summary>
[Config(typeof(QuickConfig))]
public class CrbBenchmark
{
    private CrbStudy.Realisation _one = null!;

    /// <summary>Noise realisations per case of the accuracy table.</summary>
    public const int Realisations = 300;

    [GlobalSetup]
    public void Setup()
    {
        var table = CrbStudy.Run(Realisations);
        Console.WriteLine(table);
        var path = Environment.GetEnvironmentVariable("ORDERUNFOLD_CRB_TABLE") ?? Path.Combine(Path.GetTempPath(), "orderunfold-crb-table.md");
        File.WriteAllText(path, table);
        Console.WriteLine($"// CRB table written to {path}");
        _one = CrbStudy.Make(CrbStudy.Cases[^1], seed: 1);
    }

    /// <summary>One refinement of the two-cavity case (two lines, 2 × 2 000 samples): Levenberg–Marquardt, covariance, detection limit.</summary>
    [Benchmark]
    public int RefineTwoCavities() => LineRefiner.Refine(_one.Sweeps, _one.Grid).Result.Lines.Count;
}

/// <summary>
/// The CRB accuracy study (all data SIMULATED): for each case, noise realisations of sweeps with two Airy lines (intensity
/// 1 and 0.3, 350 MHz apart in one cavity's FSR of 1 GHz; 2 000 samples over 3 FSR per sweep; one cavity, or two cavities of
/// FSR 1.0 and 1.1 GHz with their own offset, gain and background), refined from the truth moved by 0.05 linewidth. For
/// the weaker line's frequency relative to the anchor it reports the RMS error over the realisations, the mean reported
/// CRB (unscaled covariance at the fit), their ratio, the mean reported σ (χ²-scaled) and the 1σ coverage.
/// </summary>
public static class CrbStudy
{
    /// <summary>One case: how many cavities and the white-noise σ (signal units; line intensities are 1 and 0.3).</summary>
    public sealed record Case(int Cavities, double NoiseSigma);

    /// <summary>Sweeps, the hand-made grid result to refine, and the true relative frequency of the weaker line.</summary>
    public sealed record Realisation(List<CalibratedSweep> Sweeps, UnfoldResult Grid, double TrueRelativeHz);

    /// <summary>The cases of the table: four noise levels, one and two cavities.</summary>
    public static readonly IReadOnlyList<Case> Cases =
    [
        new(1, 0.1), new(1, 0.03), new(1, 0.01), new(1, 0.003),
        new(2, 0.1), new(2, 0.03), new(2, 0.01), new(2, 0.003),
    ];

    private static readonly Instrument A = new("A", 1.0e9, 100);
    private static readonly Instrument B = new("B", 1.1e9, 110);
    private const int Samples = 2000;
    private const double SpanFsr = 3;
    private static readonly (double Hz, double A)[] Lines = [(0.20e9, 1.0), (0.55e9, 0.3)];

    /// <summary>Simulated sweeps of one case for one seed, and the grid result the refinement starts from.</summary>
    public static Realisation Make(Case c, int seed)
    {
        var rng = new Random(seed);
        var specs = c.Cavities == 1
            ? new[] { (Inst: A, Offset: 0.0, Gain: 1.0, Bg: 0.02) }
            : new[] { (Inst: A, Offset: 0.0, Gain: 1.0, Bg: 0.02), (Inst: B, Offset: 0.31e9, Gain: 0.8, Bg: 0.05) };
        var sweeps = new List<CalibratedSweep>();
        foreach (var s in specs)
        {
            var scan = new double[Samples];
            var y = new double[Samples];
            for (var i = 0; i < Samples; i++)
            {
                scan[i] = SpanFsr * s.Inst.FsrHz * i / Samples;
                var v = 0.0;
                foreach (var (hz, a) in Lines) v += a * s.Inst.Transmission(hz - s.Offset - scan[i]);
                y[i] = s.Gain * v + s.Bg + c.NoiseSigma * Simulator.Gaussian(rng);
            }

            sweeps.Add(new CalibratedSweep(s.Inst.Name, s.Inst, scan, y, c.NoiseSigma));
        }

        // grid result: lines at the truth moved by 0.05 linewidth, frequencies relative to the stronger line
        var lw = A.LinewidthHz;
        var anchor = Lines[0].Hz + 0.05 * lw;
        var guesses = new[] { (Hz: anchor, A: Lines[0].A * 1.02), (Hz: Lines[1].Hz - 0.05 * lw, A: Lines[1].A * 0.97) };
        var grid = FrequencyGrid.Covering(-0.5e9 - anchor, 4e9 - anchor, lw / 4);
        var spectrum = new double[grid.Count];
        var lines = new List<UnfoldedLine>();
        foreach (var g in guesses)
        {
            var rel = g.Hz - anchor;
            var bin = Math.Clamp((int)Math.Round((rel - grid.StartHz) / grid.StepHz), 0, grid.Count - 1);
            spectrum[bin] = g.A / guesses[0].A;
            lines.Add(new UnfoldedLine(rel, g.A / guesses[0].A, g.A, 100, bin, bin));
        }

        var fits = sweeps.Select((s, k) => new SweepFit(s.Name, s.Instrument.Name, specs[k].Offset - anchor, specs[k].Gain / specs[0].Gain,
            specs[k].Bg, s.NoiseSigma, Samples, 1, s.NoiseSigma, Samples)).ToList();
        var result = new UnfoldResult
        {
            Grid = grid,
            Spectrum = spectrum,
            Lines = lines,
            Sweeps = fits,
            Solver = new NnlsResult(spectrum, 0, 0, SolverStatus.Converged, "hand-made grid result (CRB study)", 0, lines.Count),
            OrdersResolved = false, // the order check is not part of this accuracy study
            UnambiguousRangeHz = 4.5e9,
        };
        return new Realisation(sweeps, result, Lines[1].Hz - Lines[0].Hz);
    }

    /// <summary>Runs every case with <paramref name="realisations"/> seeds and returns the table as Markdown.</summary>
    public static string Run(int realisations)
    {
        var c = CultureInfo.InvariantCulture;
        var sb = new StringBuilder();
        sb.AppendLine("| cavities | noise σ | median SNR (weak line) | realisations kept | RMS error (kHz) | mean CRB (kHz) | RMS / CRB | mean σ̂ (kHz) | 1σ coverage |");
        sb.AppendLine("|---:|---:|---:|---:|---:|---:|---:|---:|---:|");
        foreach (var cs in Cases)
        {
            var errors = new List<double>();
            var crbs = new List<double>();
            var sigmas = new List<double>();
            var snrs = new List<double>();
            var hits = 0;
            for (var seed = 1; seed <= realisations; seed++)
            {
                var r = Make(cs, seed);
                var (result, diag) = LineRefiner.Refine(r.Sweeps, r.Grid);
                var weak = result.Lines.Where(l => Math.Abs(l.FrequencyHz) > 1e6).ToList();
                if (!diag.Converged || weak.Count != 1 || weak[0].FrequencyCrbHz is not double crb || weak[0].FrequencySigmaHz is not double sigma) continue;
                var err = weak[0].FrequencyHz - r.TrueRelativeHz;
                errors.Add(err);
                crbs.Add(crb);
                sigmas.Add(sigma);
                snrs.Add(weak[0].Snr);
                if (Math.Abs(err) <= sigma) hits++;
            }

            var n = errors.Count;
            var rms = n > 0 ? Math.Sqrt(errors.Average(e => e * e)) : double.NaN;
            var meanCrb = n > 0 ? crbs.Average() : double.NaN;
            snrs.Sort();
            var median = n > 0 ? snrs[n / 2] : double.NaN;
            sb.AppendLine(string.Create(c, $"| {cs.Cavities} | {cs.NoiseSigma:G3} | {median:F0} | {n}/{realisations} | {rms / 1e3:F2} | {meanCrb / 1e3:F2} | {rms / meanCrb:F3} | {(n > 0 ? sigmas.Average() / 1e3 : double.NaN):F2} | {(n > 0 ? 100.0 * hits / n : double.NaN):F1} % |"));
        }

        return sb.ToString();
    }
}
