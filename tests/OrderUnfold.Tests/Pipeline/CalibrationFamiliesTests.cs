using OrderUnfold.Calibration;
using OrderUnfold.Pipeline;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>
/// Calibration sweeps whose laser also excites the cavities' transverse families (a misaligned calibration beam). All data
/// simulated (<c>orderunfold simulate --families</c>, the demo scenario: two planar cavities, six lines).
/// </summary>
public sealed class CalibrationFamiliesTests(ITestOutputHelper output) : IDisposable
{
    private SimulatedFolder? _sim;

    private SimulatedFolder Sim => _sim ?? throw new InvalidOperationException("Simulate first");

    public void Dispose() => _sim?.Dispose();

    /// <summary>
    /// A family 60 % as tall as TEM00 at 0.468 FSR after it (the N = 1 family of L = 55 mm, R = 50 mm mirrors: Siegman,
    /// Lasers, ch. 19, o = arccos(g)/π with g = −0.1) and a second at 0.936 FSR (21 %): the calibration peaks above a third
    /// of the tallest alternate in height, and taking consecutive peaks as consecutive orders would halve the FSR in scan
    /// units (before this test: finesse read as 75 instead of 150 and the run refused). The tallest class calibrates the
    /// axis, the families are found, and the lines are the simulated ones (truth.csv written by the simulator).
    /// </summary>
    [Fact]
    public void Interleaved_family_peaks_do_not_halve_the_calibration_period()
    {
        Simulate("0.532:0.6, 0.064:0.2", "7");
        var run = UnfoldPipeline.Run(Sim.Setup);
        foreach (var i in run.Instruments) output.WriteLine(i.ToString());
        foreach (var w in run.AllWarnings) output.WriteLine($"warning: {w}");
        Assert.Contains(run.AllWarnings, w => w.Contains("interleaved groups"));
        Assert.All(run.Instruments, i => Assert.InRange(i.Finesse, 140, 160)); // simulated finesse 150
        Assert.All(run.Instruments, i => Assert.Contains(i.Families, f => f.N == 1 && Math.Abs(f.ApparentOffsetFsr - 0.468) < 0.005));
        AssertSimulatedLines(run);
    }

    /// <summary>Writes the demo scenario with the given transverse families into the test folder (<c>orderunfold simulate</c>).</summary>
    private void Simulate(string families, string seed) => _sim = new SimulatedFolder("--families", families, "--seed", seed);

    /// <summary>The simulated lines (truth.csv written by the simulator), each within a tenth of the 10 MHz linewidth (the
    /// field-trace tolerance's 0.1 FWHM, shared/field-traces/README.md) and its intensity within 10 %; no other line.</summary>
    private void AssertSimulatedLines(UnfoldRun run)
    {
        var truth = Sim.Truth();
        Assert.Equal(truth.Count, run.Result.Lines.Count);
        foreach (var (hz, intensity) in truth)
        {
            var nearest = run.Result.Lines.MinBy(l => Math.Abs(l.FrequencyHz - hz))!;
            // a tenth of the 10 MHz linewidth (the field-trace tolerance's 0.1 FWHM, shared/field-traces/README.md)
            Assert.True(Math.Abs(nearest.FrequencyHz - hz) < 1e6, $"{hz / 1e9:F4} GHz: nearest {nearest.FrequencyHz / 1e9:F6} GHz");
            Assert.Equal(intensity, nearest.Intensity, 0.1 * intensity + 0.005);
        }
    }

    /// <summary>
    /// One family at 0.75 FSR after TEM00 (o = 0.25, 50 %), off the Gouy ladder and away from half the FSR, no mirror radii:
    /// the calibration is right and reports it, but it is not part of the instrument response, so the unfold cannot fit the
    /// sources; the refusal names that family first (it named the stated FSRs and the file assignment before).
    /// </summary>
    [Fact]
    public void A_family_only_the_calibration_shows_is_named_when_the_run_is_refused()
    {
        Simulate("0.25:0.5", "11");
        try
        {
            var run = UnfoldPipeline.Run(Sim.Setup);
            // should the model one day include such a family, the lines must be the simulated ones (truth.csv)
            AssertSimulatedLines(run);
        }
        catch (InputException e)
        {
            output.WriteLine(e.Message);
            var first = e.Message.IndexOf("most suspect first: ", StringComparison.Ordinal);
            Assert.True(first >= 0, e.Message);
            Assert.StartsWith("transverse families of 'A' that its calibration sweeps show", e.Message[(first + "most suspect first: ".Length)..]);
            Assert.Contains("0.750 FSR after the main peaks, 50 %", e.Message);
        }
    }

    /// <summary>The class count on hand-made peaks whose k-th neighbours are one FSR (10 units) apart: equal heights one class;
    /// alternating 1 / 0.6 with short-long spacings two; 1 / 0.6 / 0.35 three; heights that drift alike in every class stay one
    /// class (the spacings decide then, as before).</summary>
    [Theory]
    [InlineData(new[] { 1.0, 0.98, 1.01, 0.99, 1.0, 1.02 }, 1)]
    [InlineData(new[] { 1.0, 0.6, 1.01, 0.61, 0.99, 0.59 }, 2)]
    [InlineData(new[] { 1.0, 0.6, 0.35, 1.02, 0.61, 0.34, 0.99, 0.6, 0.36 }, 3)]
    [InlineData(new[] { 1.0, 0.9, 0.8, 0.7, 0.6, 0.5 }, 1)]
    public void Interleaved_classes_from_heights(double[] heights, int expected)
    {
        // within one FSR the classes sit at 0, 4.7 (and 7.1): unequal spacings that repeat every FSR
        var within = new[] { 0.0, 4.7, 7.1 };
        var k = Math.Max(expected, 2);
        var peaks = heights.Select((h, i) => new Peak(i, 10 * (i / k) + within[i % k], h, 3)).ToList();
        Assert.Equal(expected, AxisCalibrator.InterleavedClasses(peaks));
    }

    /// <summary>Heights that alternate at even spacings stay one class (a confocal cavity stated at c/4L: every peak is one
    /// FSR); with the short-long spacings of a family at 0.47 FSR they are two.</summary>
    [Fact]
    public void Two_peaks_per_class_need_alternating_spacings()
    {
        var heights = new[] { 1.0, 0.6, 1.01, 0.61 };
        var even = heights.Select((h, i) => new Peak(10 * i, 10 * i, h, 3)).ToList();
        Assert.Equal(1, AxisCalibrator.InterleavedClasses(even));
        var x = new[] { 0.0, 4.7, 10.0, 14.7 };
        var alternating = heights.Select((h, i) => new Peak(x[i], x[i], h, 3)).ToList();
        Assert.Equal(2, AxisCalibrator.InterleavedClasses(alternating));
    }
}
