using System.Globalization;
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
public sealed class UndersampledSweepTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("orderunfold-undersampled-").FullName;

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); }
        catch (IOException) { }
    }

    [Fact]
    public void ARefusalOfAnUndersampledSweepNamesTheSampling()
    {
        var stderr = new StringWriter(CultureInfo.InvariantCulture);
        var code = OrderUnfold.Cli.Cli.Run(["simulate", "--out", _dir, "--samples", "1500"], new StringWriter(CultureInfo.InvariantCulture), stderr);
        Assert.True(code == 0, stderr.ToString());
        var e = Assert.Throws<InputException>(() => UnfoldPipeline.Run(Path.Combine(_dir, "setup.toml")));
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
