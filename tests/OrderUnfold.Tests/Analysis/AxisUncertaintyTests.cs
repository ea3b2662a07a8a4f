using MathNet.Numerics.LinearAlgebra;
using OrderUnfold.Analysis;
using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;
using Xunit;
using Xunit.Abstractions;
using static OrderUnfold.Tests.Analysis.RefinerFixtures;

namespace OrderUnfold.Tests.Analysis;

/// <summary>
/// Propagation of the scan-axis uncertainty into the line frequencies (LineUncertainties.AxisCovariance). The reference is a
/// Monte Carlo over the same model: axes drawn from the stated coefficient covariance, SIMULATED sweeps made on the drawn
/// axis, refined on the nominal one. The linear propagation must predict the spread of the relative frequency.
/// </summary>
public class AxisUncertaintyTests(ITestOutputHelper output)
{
    private static readonly Instrument Cavity = new("A", 1.0e9, 100);

    /// <summary>Nominal axis f(x) = 1.5 GHz·(t + 1) over x ∈ [0, 1) (3 FSR), written as a cubic in t = 2x − 1.</summary>
    private static readonly AxisPolynomial Nominal = new([1.5e9, 1.5e9, 0, 0], 0.5, 0.5, 0, 1);

    /// <summary>Covariance of c₁…c₃ (Hz²): 20, 30 and 15 kHz with some correlation between c₁ and c₃.</summary>
    private static readonly double[] ShapeCovariance =
    [
        400e6, 0, -120e6,
        0, 900e6, 0,
        -120e6, 0, 225e6,
    ];

    private static CalibratedSweep Simulate(Random rng, double[] deltaC, IReadOnlyList<Line> lines, double noise)
    {
        const int n = 1500;
        var x = new double[n];
        var nominal = new double[n];
        var y = new double[n];
        for (var i = 0; i < n; i++)
        {
            x[i] = (double)i / n;
            nominal[i] = Nominal.Evaluate(x[i]);
            var t = 2 * x[i] - 1;
            var trueScan = nominal[i] + deltaC[0] * t + deltaC[1] * t * t + deltaC[2] * t * t * t;
            var v = 0.05;
            foreach (var l in lines) v += l.Intensity * Cavity.Transmission(l.FrequencyHz - trueScan);
            y[i] = v + noise * Simulator.Gaussian(rng);
        }

        return new CalibratedSweep("A", Cavity, nominal, y, noise)
        {
            AxisUncertainty = new AxisUncertainty("axis A", Nominal, ShapeCovariance, x),
        };
    }

    [Fact]
    public void LinearPropagationPredictsTheMonteCarloSpread()
    {
        // 300 axes drawn from the covariance: the RMS of the fitted separation about the truth has a relative standard
        // error of 1/√(2·300) ≈ 4 %, so the band ±15 % is about 3.7σ; the noise is small enough (10⁻⁴) that its own
        // contribution (about 0.1 kHz) does not matter next to the axis part (a few kHz)
        Line[] truth = [new(0.20e9, 1.0), new(0.55e9, 0.5)];
        var spec = new FixtureSweep(Cavity, 1500, 3, 0, NoiseSigma: 1e-4);
        var chol = Matrix<double>.Build.Dense(3, 3, (i, j) => ShapeCovariance[i * 3 + j]).Cholesky().Factor;
        var rng = new Random(7);
        var errors = new List<double>();
        var predicted = new List<double>();
        for (var r = 0; r < 300; r++)
        {
            var z = Vector<double>.Build.Dense(3, _ => Simulator.Gaussian(rng));
            var deltaC = (chol * z).ToArray();
            var sweep = Simulate(rng, deltaC, truth, spec.NoiseSigma);
            var grid = Grid([sweep], [spec], truth, -0.5e9, 0.5e9, ordersResolved: false);
            var (result, diag) = LineRefiner.Refine([sweep], grid);
            Assert.True(diag.Converged, diag.ExitReason);
            var weak = result.Lines.Single(l => l.FrequencyHz != 0);
            errors.Add(weak.FrequencyHz - (truth[1].FrequencyHz - truth[0].FrequencyHz));
            Assert.NotNull(weak.FrequencyAxisSigmaHz);
            predicted.Add(weak.FrequencyAxisSigmaHz!.Value);
            Assert.True(weak.FrequencySigmaHz >= weak.FrequencyAxisSigmaHz, "the reported σ combines the statistical and the axis part");
        }

        var rms = Math.Sqrt(errors.Average(e => e * e));
        var mean = predicted.Average();
        output.WriteLine($"RMS error of the separation {rms / 1e3:F2} kHz, predicted axis σ {mean / 1e3:F2} kHz, ratio {rms / mean:F3}");
        Assert.InRange(rms / mean, 0.85, 1.15);
    }

    [Fact]
    public void WithoutAnAxisUncertaintyNothingIsAdded()
    {
        Line[] truth = [new(0.20e9, 1.0), new(0.55e9, 0.5)];
        var spec = new FixtureSweep(Cavity, 1500, 3, 0);
        var sweep = Simulate(new Random(3), [0, 0, 0], truth, spec.NoiseSigma) with { AxisUncertainty = null };
        var (result, _) = LineRefiner.Refine([sweep], Grid([sweep], [spec], truth, -0.5e9, 0.5e9, ordersResolved: false));
        Assert.All(result.Lines, l => Assert.Null(l.FrequencyAxisSigmaHz));
    }

    [Fact]
    public void ShapeCovarianceOfALineFitMatchesTheTextbookFormula()
    {
        // straight line f = c₀ + c₁t through n points with residual variance s²: Var(c₁) = s² / Σ(tᵢ − t̄)²
        // (ordinary least squares; e.g. Bevington & Robinson, "Data Reduction and Error Analysis for the Physical Sciences", ch. 6;
        // recalled from memory)
        var x = new double[] { 0, 1, 2, 3, 4, 5 };
        var f = new double[] { 0.1, 1.9, 4.2, 5.8, 8.1, 9.9 };
        var fit = AxisPolynomial.Fit(x, f, 1);
        var cov = fit.ShapeCovariance(x, f)!;
        var t = x.Select(v => (v - fit.Center) / fit.HalfRange).ToArray();
        var tm = t.Average();
        var s2 = x.Select((v, i) => Math.Pow(f[i] - fit.Evaluate(v), 2)).Sum() / (x.Length - 2);
        Assert.Equal(s2 / t.Sum(v => (v - tm) * (v - tm)), cov[0], 12);
    }
}
