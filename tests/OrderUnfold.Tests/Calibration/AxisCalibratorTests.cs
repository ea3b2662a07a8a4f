using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Calibration;

/// <summary>Sweep-axis calibration from simulated calibration-laser records (non-linear, hysteretic piezo).</summary>
public class AxisCalibratorTests(ITestOutputHelper output)
{
    private static readonly Instrument Cavity = Instrument.FromLength("A", 0.1, CavityGeometry.Planar, 150);

    private static (SimulatedTrace Trace, IReadOnlyList<Sweep> Halves) Simulate(int seed, double spanFsr = 6, int samples = 16000, bool triangle = true)
    {
        var cavity = new SimulatedCavity { Instrument = Cavity, SpanFsr = spanFsr, Samples = samples, Quadratic = 0.05, Cubic = 0.02, Hysteresis = 0.03 };
        var spec = new SimulationSpec { Lines = [new SimulatedLine(0, 1)], Cavities = [cavity], Seed = seed, Triangle = triangle };
        var trace = Simulator.Trace(spec, cavity, calibration: true, new Random(seed));
        return (trace, SimulatedSweeps.Halves(trace, "cal.csv", triangle));
    }

    [Theory]
    [InlineData(1)]
    [InlineData(2)]
    [InlineData(3)]
    public void RecoversTheTrueAxisAndTheFinesse(int seed)
    {
        var (trace, halves) = Simulate(seed);
        Assert.Equal(2, halves.Count);
        foreach (var half in halves)
        {
            var cal = AxisCalibrator.FromCalibrationSweep(half, Cavity);
            Assert.Equal(half.Direction, cal.Direction);
            Assert.Equal("A", cal.Instrument);
            Assert.True(cal.PointCount >= 5, $"{cal.PointCount} calibration points");
            Assert.True(cal.Axis.IsMonotone(cal.Axis.XMin, cal.Axis.XMax));

            // compare with the simulator's true scan shift over the calibrated range, up to a constant offset
            var truth = trace.TrueScanHz[half.FirstSample..(half.FirstSample + half.Count)];
            var inside = Enumerable.Range(0, half.Count).Where(i => half.X[i] >= cal.Axis.XMin && half.X[i] <= cal.Axis.XMax).ToArray();
            var d = inside.Select(i => cal.Axis.Evaluate(half.X[i]) - truth[i]).ToArray();
            var mean = d.Average();
            var rms = Math.Sqrt(d.Sum(v => (v - mean) * (v - mean)) / d.Length);
            output.WriteLine($"{half.Name}: degree {cal.Axis.Degree}, {cal.PointCount} points, axis RMS error {rms / 1e6:F3} MHz, fit residual {cal.ResidualRmsHz / 1e6:F3} MHz, finesse {cal.Finesse:F1} ± {cal.FinesseSigma:F1}");
            // better than a tenth of a linewidth RMS (linewidth FSR/150 ≈ 10 MHz)
            Assert.True(rms < Cavity.LinewidthHz / 10, $"{half.Name}: axis RMS error {rms / 1e6:F2} MHz");
            // the finesse measured from the peak widths within 5 % of the simulated 150
            Assert.NotNull(cal.Finesse);
            Assert.InRange(cal.Finesse!.Value, 150 * 0.95, 150 * 1.05);
            Assert.True(cal.ResidualRmsHz < Cavity.LinewidthHz / 10);
            Assert.Equal(cal.PointCount, cal.ResidualHz.Length);
        }
    }

    [Fact]
    public void PointsAreWholeFsrsApartWithTheRampSign()
    {
        var (_, halves) = Simulate(4);
        var up = AxisCalibrator.FromCalibrationSweep(halves[0], Cavity);
        var down = AxisCalibrator.FromCalibrationSweep(halves[1], Cavity);
        for (var i = 0; i < up.PointCount; i++) Assert.Equal(i * Cavity.FsrHz, up.PointHz[i], 1e-3);
        // on the down ramp (time scan) the frequency decreases with time
        for (var i = 0; i < down.PointCount; i++) Assert.Equal(-i * Cavity.FsrHz, down.PointHz[i], 1e-3);
        Assert.True(up.Axis.Derivative(up.Axis.XMin) > 0);
        Assert.True(down.Axis.Derivative(down.Axis.XMin) < 0);
    }

    [Fact]
    public void StatedDegreeIsUsed()
    {
        var (_, halves) = Simulate(5);
        var cal = AxisCalibrator.FromCalibrationSweep(halves[0], Cavity, degree: 3);
        Assert.Equal(3, cal.Axis.Degree);
    }

    [Fact]
    public void CalibrationLaserAtAnotherWavelengthScalesTheAxis()
    {
        // one calibration-laser FSR of mirror travel moves the source comb by λ_cal/λ_source FSRs
        var (_, halves) = Simulate(6);
        var same = AxisCalibrator.FromCalibrationSweep(halves[0], Cavity, degree: 3);
        var other = AxisCalibrator.FromCalibrationSweep(halves[0], Cavity, degree: 3, wavelengthRatio: 0.8);
        foreach (var x in new[] { same.Axis.XMin, 0.5 * (same.Axis.XMin + same.Axis.XMax), same.Axis.XMax })
            Assert.Equal(0.8 * same.Axis.Evaluate(x), other.Axis.Evaluate(x), 1e3);
    }

    private static Sweep Synthetic(Func<int, double> y, int n) => new()
    {
        Name = "synthetic.csv (single)",
        Source = "/data/synthetic.csv",
        X = Enumerable.Range(0, n).Select(i => i * 1e-6).ToArray(),
        Y = Enumerable.Range(0, n).Select(y).ToArray(),
        Direction = RampDirection.Single,
        Scan = ScanCoordinate.Time,
    };

    [Fact]
    public void FlatSignalIsAnInputErrorThatSaysWhatWasExpected()
    {
        var e = Assert.Throws<InputException>(() => AxisCalibrator.FromCalibrationSweep(Synthetic(_ => 0.031, 5000), Cavity));
        Assert.Contains("no calibration peaks found", e.Message);
        Assert.Contains("synthetic.csv", e.Message);
        Assert.Contains("one per FSR", e.Message);
        Assert.Equal("/data/synthetic.csv", e.File);
    }

    [Fact]
    public void OnePeakIsAnInputErrorAskingForMoreThanOneFsr()
    {
        // one Airy peak in the record: period 4000 samples, record 3000 samples, peak at 1500
        var sweep = Synthetic(i => Airy.Transmission(i - 1500, 4000, 100), 3000);
        var e = Assert.Throws<InputException>(() => AxisCalibrator.FromCalibrationSweep(sweep, Cavity));
        Assert.Contains("only one calibration peak", e.Message);
        Assert.Contains("more than one FSR", e.Message);
        Assert.Contains("1.499 GHz", e.Message);
        Assert.Equal("/data/synthetic.csv", e.File);
    }

    [Fact]
    public void TooFewPeaksForTheStatedDegree()
    {
        // peaks at 150, 400 and 650 (period 250, record 800): three points
        var sweep = Synthetic(i => Airy.Transmission(i - 150, 250, 60), 800);
        var e = Assert.Throws<InputException>(() => AxisCalibrator.FromCalibrationSweep(sweep, Cavity, degree: 3));
        Assert.Contains("3 calibration peaks are too few for a degree-3 axis", e.Message);
        Assert.Contains("needs at least 4", e.Message);
        // degree 2 fits through three points
        Assert.Equal(3, AxisCalibrator.FromCalibrationSweep(sweep, Cavity, degree: 2).PointCount);
        var zero = Assert.Throws<InputException>(() => AxisCalibrator.FromCalibrationSweep(sweep, Cavity, degree: 0));
        Assert.Contains("at least 1", zero.Message);
    }

    [Fact]
    public void FewPointsGiveAWarning()
    {
        var sweep = Synthetic(i => Airy.Transmission(i - 150, 250, 60), 800);
        var cal = AxisCalibrator.FromCalibrationSweep(sweep, Cavity);
        Assert.Contains(cal.Warnings, w => w.Contains("only 3 calibration peaks"));
    }
}
