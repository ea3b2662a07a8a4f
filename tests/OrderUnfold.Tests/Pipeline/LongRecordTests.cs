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
public class LongRecordTests
{
    [Fact]
    public void ACrowdedGridOfALongRecordGivesTheSimulatedLines()
    {
        using var sim = new SimulatedFolder("--samples", "50000", "--bits", "0");
        var run = UnfoldPipeline.Run(sim.Setup);
        var truth = sim.Truth();
        var anchor = truth.MaxBy(t => t.Intensity).Hz;
        var expected = truth.Select(t => t.Hz - anchor).Order().ToList();
        Assert.Contains(run.AllWarnings, w => w.Contains("more than a line fit checks", StringComparison.Ordinal));
        Assert.Equal(expected.Count, run.Result.Lines.Count);
        // within a tenth of the 10 MHz linewidth (the field-trace tolerance's 0.1 FWHM, shared/field-traces/README.md)
        for (var k = 0; k < expected.Count; k++) Assert.Equal(expected[k], run.Result.Lines[k].FrequencyHz, 1e6);
        Assert.InRange(run.Result.ReducedChiSquare, 0.9, 1.1);

        // without the line refinement the crowded grid is reported as it is, and a warning says what it may hold
        File.WriteAllText(sim.Setup, File.ReadAllText(sim.Setup).Replace("refine = true", "refine = false", StringComparison.Ordinal));
        var grid = UnfoldPipeline.Run(sim.Setup);
        Assert.True(grid.Result.Lines.Count > UnfoldPipeline.MaxUnrefinedLines);
        Assert.Contains(grid.AllWarnings, w => w.Contains("the grid's own small alias bins", StringComparison.Ordinal));
    }
}
