using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using Xunit;

namespace OrderUnfold.Tests.Calibration;

/// <summary>Peak finding on sampled (simulated) Airy and Lorentzian peaks, digitised with 8 bits like a scope.</summary>
public class PeakFinderTests
{
    /// <summary>Quantises to an n-bit digitiser spanning [lo, hi].</summary>
    private static double[] Quantise(double[] y, int bits, double lo, double hi)
    {
        var levels = (1 << bits) - 1;
        var lsb = (hi - lo) / levels;
        return y.Select(v => lo + Math.Clamp(Math.Round((v - lo) / lsb), 0, levels) * lsb).ToArray();
    }

    [Theory]
    [InlineData(400.0, 20.0, 0.0)]   // FWHM ≈ 20 samples, no noise
    [InlineData(400.0, 40.0, 0.0)]   // FWHM ≈ 10 samples
    [InlineData(733.3, 30.0, 0.004)] // FWHM ≈ 24 samples, 0.4 % noise before the digitiser
    public void AiryCombPositionsAndWidthsUnder8BitQuantisation(double periodSamples, double finesse, double noise)
    {
        var rng = new Random(1);
        const int n = 4000;
        const double first = 123.37;
        var clean = Enumerable.Range(0, n).Select(i => Airy.Transmission(i - first, periodSamples, finesse)).ToArray();
        var noisy = clean.Select(v => 0.02 + v + noise * OrderUnfold.Simulation.Simulator.Gaussian(rng)).ToArray();
        var y = Quantise(noisy, 8, -0.05, 1.15);
        var x = Enumerable.Range(0, n).Select(i => 2e-6 * i).ToArray(); // time axis, 2 µs per sample
        var peaks = PeakFinder.Find(x, y, 0.3, 5);
        var expectedCount = (int)Math.Floor((n - 1 - first) / periodSamples) + 1;
        Assert.Equal(expectedCount, peaks.Count);
        var fwhm = Airy.ExactFwhm(periodSamples, finesse); // in samples
        for (var k = 0; k < peaks.Count; k++)
        {
            var truth = first + k * periodSamples;
            // sub-sample position within 0.05 sample (tolerance set by this test's requirement)
            Assert.True(Math.Abs(peaks[k].Position - truth) < 0.05, $"peak {k}: {peaks[k].Position:F4} vs {truth:F4}");
            Assert.Equal(2e-6 * peaks[k].Position, peaks[k].X, 1e-15);
            // FWHM within 3 % of the exact Airy width
            Assert.True(Math.Abs(peaks[k].WidthSamples / fwhm - 1) < 0.03, $"peak {k}: width {peaks[k].WidthSamples:F3} vs {fwhm:F3}");
            Assert.InRange(peaks[k].Height, 0.95, 1.06);
        }
    }

    [Theory]
    [InlineData(500.25, 6.0)]
    [InlineData(500.5, 8.0)]
    [InlineData(499.9, 15.0)]
    public void LorentzianPeak(double centre, double fwhm)
    {
        const int n = 1000;
        var gamma = fwhm / 2;
        var y = Quantise(Enumerable.Range(0, n).Select(i => 1 / (1 + Math.Pow((i - centre) / gamma, 2))).ToArray(), 8, -0.05, 1.1);
        var x = Enumerable.Range(0, n).Select(i => (double)i).ToArray();
        var p = Assert.Single(PeakFinder.Find(x, y));
        Assert.True(Math.Abs(p.Position - centre) < 0.05, $"{p.Position} vs {centre}");
        Assert.True(Math.Abs(p.WidthSamples / fwhm - 1) < 0.04, $"width {p.WidthSamples} vs {fwhm}");
    }

    [Fact]
    public void PeaksCutByTheRecordEdgeAreSkipped()
    {
        var y = Enumerable.Range(0, 1000).Select(i => Airy.Transmission(i - 2, 400, 20) ).ToArray();
        var x = Enumerable.Range(0, 1000).Select(i => (double)i).ToArray();
        var peaks = PeakFinder.Find(x, y);
        // peaks at 2 (cut by the start), 402 and 802
        Assert.Equal(2, peaks.Count);
        Assert.Equal(402, peaks[0].Position, 0.05);
        Assert.Equal(802, peaks[1].Position, 0.05);
    }

    [Fact]
    public void FlatOrTinySignalsHaveNoPeaks()
    {
        var x = Enumerable.Range(0, 500).Select(i => (double)i).ToArray();
        Assert.Empty(PeakFinder.Find(x, x.Select(_ => 0.3).ToArray()));
        Assert.Empty(PeakFinder.Find([0.0, 1.0], [0.0, 1.0]));
    }

    [Fact]
    public void NoiseEstimateOfGaussianNoise()
    {
        // the median-absolute-difference estimate of σ for white Gaussian noise (simulated), within 5 %
        var rng = new Random(2);
        var y = Enumerable.Range(0, 20000).Select(_ => 0.01 * OrderUnfold.Simulation.Simulator.Gaussian(rng)).ToArray();
        Assert.Equal(0.01, NoiseEstimator.FirstDifferenceSigma(y), 0.0005);
        // a quantised flat record has at least the quantisation noise LSB/√12
        var q = Enumerable.Range(0, 1000).Select(i => i % 7 == 0 ? 0.004 : 0.0).ToArray();
        Assert.Equal(0.004 / Math.Sqrt(12), NoiseEstimator.FirstDifferenceSigma(q), 1e-12);
        Assert.Equal(0.0, NoiseEstimator.FirstDifferenceSigma([1.0, 2.0]));
    }

    [Fact]
    public void PercentileAndInterpolate()
    {
        var y = Enumerable.Range(0, 101).Select(i => (double)(100 - i)).ToArray();
        Assert.Equal(0.0, PeakFinder.Percentile(y, 0));
        Assert.Equal(50.0, PeakFinder.Percentile(y, 0.5));
        Assert.Equal(100.0, PeakFinder.Percentile(y, 1));
        double[] x = [0.0, 10.0, 30.0];
        Assert.Equal(5.0, PeakFinder.Interpolate(x, 0.5));
        Assert.Equal(20.0, PeakFinder.Interpolate(x, 1.5));
        Assert.Equal(0.0, PeakFinder.Interpolate(x, -1));
        Assert.Equal(30.0, PeakFinder.Interpolate(x, 7));
    }
}
