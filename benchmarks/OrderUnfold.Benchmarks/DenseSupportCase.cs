using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// A dense-support NNLS problem (SIMULATED DATA): a broadband source — lines every two grid steps across 90 % of the
/// window, each 20 MHz wide (Lorentzian), under a smooth envelope with a ripple, like a slice of an ASE spectrum —
/// seen by the demo's two planar cavities (100.0 mm and 93.7 mm, finesse 150), one single-direction sweep each over
/// 5 FSRs, 12-bit digitiser, 0.4 % noise, true scan axis, offsets and gains. The problem is the unfolder's joint
/// problem with no L1 weight and a light first-difference smoothness weight (<see cref="SmoothnessFactor"/>), as a user
/// would unfold a broadband source, so most bins end up active.
/// <c>rows</c> is the total sample count (two sweeps of rows / 2), <c>bins</c> the grid size (default step, a quarter
/// linewidth, centred on 0). Deterministic: the same sizes give the same problem.
/// This file is shared by the benchmarks and the tests (linked into the test project).
/// </summary>
public sealed record DenseSupportCase(List<CalibratedSweep> Sweeps, FrequencyGrid Grid, double[] OffsetsHz, double[] Gains, double PeriodicStepHz)
{
    public static DenseSupportCase Create(int rows, int bins) => Create(rows, bins, windowQuarterLinewidths: bins);

    /// <summary>
    /// The same source and cavities over a window of <paramref name="windowQuarterLinewidths"/> quarter linewidths
    /// (2.50 MHz each) split into <paramref name="bins"/> bins, so the step is window / bins; the lines stay every two
    /// quarter linewidths (5.0 MHz) across 90 % of the window whatever the step. With window = bins this is
    /// <see cref="Create(int, int)"/>; a fixed window with more bins is the same measurement on a finer grid.
    /// </summary>
    public static DenseSupportCase Create(int rows, int bins, int windowQuarterLinewidths)
    {
        var demo = Scenarios.Demo();
        var lw = demo.Cavities.Min(c => c.Instrument.LinewidthHz);
        var step = windowQuarterLinewidths == bins ? lw / 4 : lw / 4 * windowQuarterLinewidths / bins;
        var lineSpacing = 2 * (lw / 4);
        var grid = new FrequencyGrid(-(bins / 2) * step, step, bins);
        var half = 0.45 * bins * step;
        var lines = new List<SimulatedLine>();
        for (var f = -half; f <= half; f += lineSpacing)
        {
            var u = f / half;
            var envelope = 0.3 + 0.7 * Math.Exp(-2 * u * u) + 0.1 * Math.Sin(7 * u);
            lines.Add(new SimulatedLine(f, envelope, 20e6));
        }

        var spec = demo with
        {
            Lines = lines,
            Cavities = demo.Cavities.Select(c => c with { Samples = rows / 2, SpanFsr = 5 }).ToList(),
            Triangle = false,
            Bits = 12,
            Seed = 2027,
        };
        var rng = new Random(spec.Seed);
        var sweeps = new List<CalibratedSweep>();
        var offsets = new List<double>();
        var gains = new List<double>();
        foreach (var cav in spec.Cavities)
        {
            var trace = Simulator.Trace(spec, cav, calibration: false, rng);
            sweeps.Add(new CalibratedSweep(cav.Instrument.Name, cav.Instrument, trace.TrueScanHz, trace.Signal, NoiseEstimator.FirstDifferenceSigma(trace.Signal)));
            offsets.Add(trace.OffsetHz);
            gains.Add(cav.Gain);
        }

        return new DenseSupportCase(sweeps, grid, offsets.ToArray(), gains.ToArray(), Math.Min(step / 2, lw / 20));
    }

    /// <summary>The problem at the true offsets and gains: no L1 weight, smoothness weight μ = factor × the middle column's
    /// squared norm (0: plain NNLS).</summary>
    public UnfoldProblem Problem(double smoothnessFactor = SmoothnessFactor)
    {
        var p = new UnfoldProblem(Sweeps, Grid, OffsetsHz, Gains, 0, 0, PeriodicStepHz);
        return smoothnessFactor > 0 ? p.WithPenalties(0, smoothnessFactor * p.ColumnNormSquared(Grid.Count / 2)) : p;
    }

    /// <summary>The smoothness weight μ of the benchmark problem relative to the squared norm of the middle column (as the
    /// unfolder's <c>smoothness</c> option, which a user sets for a broadband source; 10⁻³ hardly changes the fit).</summary>
    public const double SmoothnessFactor = 1e-3;

    /// <summary>The least-squares objective ½‖A x − y‖² + ½ μ‖D s‖² of a solution x = (spectrum, whitened backgrounds) in
    /// noise-whitened units, the number the reference script reports for scipy's solution of the same problem.</summary>
    public double Objective(UnfoldProblem problem, ReadOnlySpan<double> x)
    {
        var mu = problem.SmoothnessWeight;
        var penalty = 0.0;
        for (var j = 0; j + 1 < Grid.Count; j++) penalty += (x[j + 1] - x[j]) * (x[j + 1] - x[j]);

        var models = problem.Model(x);
        var sum = 0.0;
        for (var k = 0; k < Sweeps.Count; k++)
        {
            var y = Sweeps[k].Signal;
            var s = Sweeps[k].NoiseSigma;
            for (var i = 0; i < y.Length; i++)
            {
                var r = (y[i] - models[k][i]) / s;
                sum += r * r;
            }
        }

        return 0.5 * sum + 0.5 * mu * penalty;
    }

    /// <summary>
    /// Writes the problem as dense arrays for an outside solver: <c>A.f64</c> (rows × bins, row-major, little-endian
    /// float64: the whitened model of a unit bin, gain included), <c>y.f64</c> (whitened signal), <c>sweep.i32</c>
    /// (which sweep each row belongs to: each sweep has a free background, which the outside solver removes by
    /// centring per sweep), and <c>shape.txt</c> (rows, bins and μ: the smoothness rows √μ (s_{j+1} − s_j) are added by the
    /// outside solver).
    /// </summary>
    public void Export(string directory)
    {
        Directory.CreateDirectory(directory);
        var problem = Problem();
        var rows = Sweeps.Sum(s => s.Signal.Length);
        var n = Grid.Count;
        var unit = new double[n];
        using (var a = new BinaryWriter(File.Create(Path.Combine(directory, "A.f64"))))
        {
            // columns are computed one at a time; write row-major through a transposed buffer in blocks of rows
            var columns = new double[n][];
            for (var j = 0; j < n; j++)
            {
                unit[j] = 1;
                var col = new double[rows];
                var offset = 0;
                for (var k = 0; k < Sweeps.Count; k++)
                {
                    var f = problem.ForwardUnscaled(k, unit);
                    var c = problem.Scale(k);
                    for (var i = 0; i < f.Length; i++) col[offset + i] = c * f[i];
                    offset += f.Length;
                }

                unit[j] = 0;
                columns[j] = col;
            }

            for (var i = 0; i < rows; i++)
                for (var j = 0; j < n; j++)
                    a.Write(columns[j][i]);
        }

        using (var y = new BinaryWriter(File.Create(Path.Combine(directory, "y.f64"))))
        using (var w = new BinaryWriter(File.Create(Path.Combine(directory, "sweep.i32"))))
        {
            for (var k = 0; k < Sweeps.Count; k++)
                foreach (var v in Sweeps[k].Signal)
                {
                    y.Write(v / Sweeps[k].NoiseSigma);
                    w.Write(k);
                }
        }

        File.WriteAllText(Path.Combine(directory, "shape.txt"), FormattableString.Invariant($"{rows} {n} {problem.SmoothnessWeight:R}\n"));
    }
}
