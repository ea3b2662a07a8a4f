using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using Xunit;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>
/// Sweeps whose peaks fall between samples: the demo scenario recorded with 1 500 samples per record (SIMULATED DATA,
/// <c>orderunfold simulate --samples 1500</c>: five FSRs a ramp direction, about one sample per 10 MHz linewidth) cannot be
/// fitted, and the refusal says so instead of blaming only the stated FSR.
/// </summary>
public class UndersampledSweepTests
{
    [Fact]
    public void ARefusalOfAnUndersampledSweepNamesTheSampling()
    {
        using var sim = new SimulatedFolder("--samples", "1500");
        var e = Assert.Throws<InputException>(() => UnfoldPipeline.Run(sim.Setup));
        Assert.Contains("samples per linewidth", e.Message);
        Assert.Contains("sampled too coarsely", e.Message);
    }

    [Fact]
    public void SamplesPerLinewidthIsTheLinewidthOverTheMedianSampleSpacing()
    {
        var inst = Instrument.FromLength("C", 0.1, CavityGeometry.Planar, 150); // FSR c/2L ≈ 1.499 GHz, linewidth ≈ 9.99 MHz
        var scan = Enumerable.Range(0, 1001).Select(i => i * 2.5e6).ToArray(); // 2.5 MHz apart
        scan[500] += 1e9; // one jump does not move the median
        var sweep = new CalibratedSweep("s", inst, scan, new double[scan.Length], 1);
        Assert.Equal(inst.LinewidthHz / 2.5e6, RunChecks.SamplesPerLinewidth(sweep), 1e-9);
    }
}
