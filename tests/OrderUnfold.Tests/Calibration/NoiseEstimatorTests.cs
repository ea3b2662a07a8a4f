using OrderUnfold.Calibration;
using OrderUnfold.Simulation;
using Xunit;

namespace OrderUnfold.Tests.Calibration;

/// <summary>
/// The noise estimate on simulated signals (labelled simulated: Gaussian noise from a seeded generator). The reference
/// values are textbook facts: a uniform quantiser of step q adds noise of variance q²/12 when the signal spreads over
/// several steps (Widrow &amp; Kollár, "Quantization Noise", Cambridge 2008, ch. 4: the quantisation noise model), and
/// independent variances add.
/// </summary>
public class NoiseEstimatorTests
{
    private static double[] Gaussian(int n, double sigma, int seed, Func<int, double>? signal = null)
    {
        var rng = new Random(seed);
        return Enumerable.Range(0, n).Select(i => (signal?.Invoke(i) ?? 0) + sigma * Simulator.Gaussian(rng)).ToArray();
    }

    private static double Lorentzian(double x, double x0, double fwhm) => 1 / (1 + Math.Pow(2 * (x - x0) / fwhm, 2));

    /// <summary>Simulated line-spectrum sweep: peaks every 600 samples, 20 samples wide (FWHM), height 1.</summary>
    private static double Peaks(int i) => Enumerable.Range(0, 12).Sum(k => Lorentzian(i, 300 + 600 * k, 20));

    [Theory]
    [InlineData(1)]
    [InlineData(2)]
    [InlineData(3)]
    public void ContinuousWhiteNoiseIsRecovered(int seed)
    {
        var y = Gaussian(20000, 0.01, seed);
        var est = NoiseEstimator.Estimate(y);
        Assert.Null(est.QuantisationStep);
        // statistical spread of the estimate over 20 000 samples is about 1 %: allow 4 %
        Assert.InRange(est.Sigma / 0.01, 0.96, 1.04);
        Assert.Equal(0, est.VarianceSlope);
    }

    [Theory]
    [InlineData(1, 1.0)]
    [InlineData(2, 0.7)]
    [InlineData(3, 1.5)]
    public void QuantisedNoiseCountsTheQuantisationVariance(int seed, double sigmaInSteps)
    {
        // an 8-bit-like record: Gaussian noise of σ = sigmaInSteps·q, rounded to the step q, on top of peaks
        const double q = 0.004;
        var y = Gaussian(20000, sigmaInSteps * q, seed, i => 0.6 * Peaks(i)).Select(v => Math.Round(v / q) * q).ToArray();
        var est = NoiseEstimator.Estimate(y);
        Assert.NotNull(est.QuantisationStep);
        Assert.InRange(est.QuantisationStep!.Value / q, 0.999, 1.001);
        // Widrow & Kollár (2008), ch. 4: total variance σ² + q²/12 (valid for σ ≳ q/2); 5 % allowed
        var expected = Math.Sqrt(Math.Pow(sigmaInSteps * q, 2) + q * q / 12);
        Assert.InRange(est.Sigma / expected, 0.95, 1.05);
    }

    [Fact]
    public void PeaksAndADriftingBaselineDoNotInflateTheEstimate()
    {
        // tall peaks (1000 σ) 20 samples wide on a slowly drifting baseline
        var y = Gaussian(24000, 0.001, 7, i => Peaks(i) + 0.05 * Math.Sin(2 * Math.PI * i / 24000.0));
        var est = NoiseEstimator.Estimate(y);
        Assert.InRange(est.Sigma / 0.001, 0.95, 1.08);
    }

    [Fact]
    public void NoiseGrowingWithTheSignalIsSeenAndAveraged()
    {
        // σ² = σ₀² + k·s with s the clean signal (shot-noise-like), peaks 100 samples wide so that many samples are bright
        const double s0 = 0.002, k = 4e-4;
        var rng = new Random(11);
        var clean = Enumerable.Range(0, 30000).Select(i => Enumerable.Range(0, 10).Sum(m => Lorentzian(i, 1500 + 3000 * m, 300))).ToArray();
        var y = clean.Select(s => s + Math.Sqrt(s0 * s0 + k * s) * Simulator.Gaussian(rng)).ToArray();
        var est = NoiseEstimator.Estimate(y);
        Assert.True(est.VarianceSlope > 0, "signal-dependent noise not detected");
        Assert.InRange(est.VarianceSlope / k, 0.7, 1.3);
        var expected = Math.Sqrt(clean.Average(s => s0 * s0 + k * s));
        Assert.InRange(est.Sigma / expected, 0.9, 1.1);
        // the dark level is the darker half of the record, where the tails of the peaks still add k·s
        var darker = clean.OrderBy(s => s).Take(clean.Length / 2).ToArray();
        Assert.InRange(est.SigmaBaseline / Math.Sqrt(darker.Average(s => s0 * s0 + k * s)), 0.85, 1.15);
    }

    [Fact]
    public void StepDetectionNeedsValuesOnAGrid()
    {
        Assert.Null(NoiseEstimator.DetectStep(Gaussian(5000, 1, 3)));
        var q = 1.0 / 256;
        var grid = Gaussian(5000, 3 * q, 4).Select(v => Math.Round(v / q) * q + 0.1).ToArray();
        Assert.InRange(NoiseEstimator.DetectStep(grid)!.Value / q, 0.999, 1.001);
    }
}
