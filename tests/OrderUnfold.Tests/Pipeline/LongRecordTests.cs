using System.Globalization;
using OrderUnfold.Pipeline;
using Xunit;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>
/// The demo scenario recorded with 50 000 samples per record and no digitiser quantisation (SIMULATED DATA,
/// <c>orderunfold simulate --samples 50000 --bits 0</c>): about 30 samples per linewidth at a signal-to-noise ratio of
/// 250, where the grid's own misfit of a line between two bins is far above the noise. The grid held 121 candidate lines
/// (the six true ones and alias bins below 0.6 % of the strongest; 63 above min_snr) and their line fit ran out of its
/// budget, so the run was refused; the fewest-lines explanation of the crowded grid gives the six lines.
/// </summary>
public sealed class LongRecordTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("orderunfold-long-").FullName;

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); }
        catch (IOException) { }
    }

    [Fact]
    public void ACrowdedGridOfALongRecordGivesTheSimulatedLines()
    {
        var stderr = new StringWriter(CultureInfo.InvariantCulture);
        var code = OrderUnfold.Cli.Cli.Run(["simulate", "--out", _dir, "--samples", "50000", "--bits", "0"], new StringWriter(CultureInfo.InvariantCulture), stderr);
        Assert.True(code == 0, stderr.ToString());
        var run = UnfoldPipeline.Run(Path.Combine(_dir, "setup.toml"));
        var truth = File.ReadLines(Path.Combine(_dir, "truth.csv")).Where(l => l.Length > 0 && (char.IsAsciiDigit(l[0]) || l[0] == '-'))
            .Select(l => double.Parse(l.Split(',')[0], CultureInfo.InvariantCulture)).Order().ToList();
        var strongest = File.ReadLines(Path.Combine(_dir, "truth.csv")).Where(l => l.Length > 0 && (char.IsAsciiDigit(l[0]) || l[0] == '-'))
            .Select(l => l.Split(',')).MaxBy(f => double.Parse(f[1], CultureInfo.InvariantCulture))!;
        var anchor = double.Parse(strongest[0], CultureInfo.InvariantCulture);
        Assert.Contains(run.AllWarnings, w => w.Contains("more than a line fit checks", StringComparison.Ordinal));
        Assert.Equal(truth.Count, run.Result.Lines.Count);
        // within a tenth of the 10 MHz linewidth (the field-trace tolerance's 0.1 FWHM, shared/field-traces/README.md)
        for (var k = 0; k < truth.Count; k++) Assert.Equal(truth[k] - anchor, run.Result.Lines[k].FrequencyHz, 1e6);
        Assert.InRange(run.Result.ReducedChiSquare, 0.9, 1.1);
    }
}
