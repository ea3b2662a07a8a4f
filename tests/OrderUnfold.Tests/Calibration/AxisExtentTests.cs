using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Calibration;

/// <summary>
/// Using a sweep beyond its outermost calibration points (simulated calibration records: non-linear, hysteretic
/// piezo). The check is against the simulator's own true scan shift, so it tests the honesty of the stated
/// extrapolation uncertainty, not the physics.
/// </summary>
public class AxisExtentTests(ITestOutputHelper output)
{
    private static readonly Instrument Cavity = Instrument.FromLength("A", 0.1, CavityGeometry.Planar, 150);

    [Theory]
    [InlineData(1, 3)]
    [InlineData(2, 3)]
    [InlineData(3, 2)]
    [InlineData(4, 2)]
    [InlineData(5, 2)]
    public void ExtrapolatedAxisStaysWithinItsStatedUncertainty(int seed, int degree)
    {
        var cavity = new SimulatedCavity { Instrument = Cavity, SpanFsr = 6.3, Samples = 16000, Quadratic = 0.06, Cubic = 0.03, Hysteresis = 0.03 };
        var spec = new SimulationSpec { Lines = [new SimulatedLine(0, 1)], Cavities = [cavity], Seed = seed, Triangle = true };
        var trace = Simulator.Trace(spec, cavity, calibration: true, new Random(seed));
        foreach (var half in SimulatedSweeps.Halves(trace, "cal.csv"))
        {
            var cal = AxisCalibrator.FromCalibrationSweep(half, Cavity, degree);
            var extent = AxisExtent.Evaluate(cal, half.X, Cavity.LinewidthHz, Cavity.FsrHz);
            var truth = trace.TrueScanHz[half.FirstSample..(half.FirstSample + half.Count)];
            // the axis's additive constant is free: compare after removing the mean difference inside the calibrated range
            var inside = extent.Keep.Where((_, j) => extent.ExtrapolationSigmaHz[j] == 0).ToArray();
            var shift = inside.Average(i => cal.Axis.Evaluate(half.X[i]) - truth[i]);
            var insideMax = inside.Max(i => Math.Abs(cal.Axis.Evaluate(half.X[i]) - truth[i] - shift));
            var worst = 0.0;
            for (var j = 0; j < extent.Keep.Length; j++)
            {
                var sigma = extent.ExtrapolationSigmaHz[j];
                if (sigma == 0) continue;
                var i = extent.Keep[j];
                var err = Math.Abs(cal.Axis.Evaluate(half.X[i]) - truth[i] - shift);
                // the axis error inside the range (largest at its edges) carries on beyond them; the stated σ covers the growth
                worst = Math.Max(worst, err / (3 * sigma + 1.1 * insideMax));
            }

            output.WriteLine($"{half.Name}: degree {cal.Axis.Degree}, kept {extent.Keep.Length}/{half.Count}, extrapolated {extent.Extrapolated}, max σ {extent.MaxSigmaHz / 1e3:F0} kHz, largest error inside {insideMax / 1e3:F0} kHz, worst |error|/(3σ + 1.1 × that) {worst:F2}");
            Assert.True(worst <= 1, $"{half.Name}: an extrapolated sample's axis error exceeds 3 σ + the largest error inside the range ({worst:F2})");
            Assert.True(extent.MaxSigmaHz <= 0.25 * Cavity.LinewidthHz);
        }
    }

    [Fact]
    public void SamplesBeyondTheHardMarginAreDropped()
    {
        // a straight axis over x ∈ [0, 4] with one FSR per unit of x: samples up to x = 9 lie up to five periods out
        var fsr = Cavity.FsrHz;
        var axis = AxisPolynomial.Fit([0.0, 1, 2, 3, 4], [0.0, fsr, 2 * fsr, 3 * fsr, 4 * fsr], 1);
        var cal = new AxisCalibration("A", OrderUnfold.Data.RampDirection.Up, "cal", "test", axis, [0.0, 1, 2, 3, 4], [0.0, fsr, 2 * fsr, 3 * fsr, 4 * fsr],
            new double[5], 0, null, null, []);
        var x = Enumerable.Range(0, 901).Select(i => i / 100.0).ToArray();
        var extent = AxisExtent.Evaluate(cal, x, Cavity.LinewidthHz, fsr, new AxisExtentOptions { MaxMarginPeriods = 0.5 });
        Assert.All(extent.Keep, i => Assert.True(x[i] <= 4.5 + 1e-9));
        Assert.Equal(401 + 50, extent.Keep.Length);
    }
}
