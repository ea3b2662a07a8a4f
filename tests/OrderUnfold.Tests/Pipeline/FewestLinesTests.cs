using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Pipeline;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>The fewest-lines pairing of two cavities' folded lines (Pipeline/FewestLines.cs). All data simulated.</summary>
public sealed class FewestLinesTests(ITestOutputHelper output)
{
    /// <summary>An invented comb: five lines 41.7 GHz apart with unequal powers, wider than the two cavities' first
    /// near-alias, seen by two planar cavities of 16 mm and 22.7 mm (FSR about 9.4 and 6.6 GHz; their first near-alias, 112.4 GHz, is shorter than the comb); simulated.</summary>
    private static (List<CalibratedSweep> Sweeps, SimulatedLine[] Lines) Scenario()
    {
        var lines = new[] { new SimulatedLine(-83.4e9, 0.35), new SimulatedLine(-41.7e9, 0.8), new SimulatedLine(0, 1.0), new SimulatedLine(41.7e9, 0.6), new SimulatedLine(83.4e9, 0.2) };
        var a = new SimulatedCavity { Instrument = Instrument.FromLength("A", 0.016, CavityGeometry.Planar, 150), SpanFsr = 2.3, Samples = 12000 };
        var b = new SimulatedCavity { Instrument = Instrument.FromLength("B", 0.0227, CavityGeometry.Planar, 160), SpanFsr = 2.3, Samples = 12000, Gain = 1.2 };
        var spec = new SimulationSpec { Lines = lines, Cavities = [a, b], Seed = 11, Triangle = false };
        return (SimulatedSweeps.Calibrated(spec, useTrueAxis: true), lines);
    }

    [Fact]
    public void Pairing_the_folded_lines_gives_the_comb_and_is_kept_when_it_fits_as_well_as_the_grid()
    {
        var (sweeps, truth) = Scenario();
        var options = new UnfoldOptions { WindowStartHz = -150e9, WindowEndHz = 150e9 };
        var grid = Unfolder.Run(sweeps, options);
        output.WriteLine($"grid: {grid.Lines.Count} lines, reduced χ² {grid.ReducedChiSquare:F3}");
        var (result, refinement, finding) = FewestLines.Run(sweeps, grid, options, 150e9, new RefineOptions(), null);
        output.WriteLine($"{finding}");
        foreach (var l in result.Lines) output.WriteLine($"line {l.FrequencyHz / 1e9:F4} GHz ± {l.FrequencySigmaHz / 1e6:F2} MHz, intensity {l.Intensity:F3}, {l.Verdict}");
        Assert.True(finding.Kept, finding.Reason);
        Assert.NotNull(refinement);
        Assert.Equal(truth.Length, result.Lines.Count);
        // frequencies relative to the strongest line within a tenth of the narrower linewidth (common practice), and
        // intensities within 10 % of the simulated ones
        var lw = sweeps.Min(s => s.Instrument.LinewidthHz);
        foreach (var t in truth)
        {
            var near = result.Lines.MinBy(l => Math.Abs(l.FrequencyHz - t.FrequencyHz))!;
            Assert.InRange(near.FrequencyHz - t.FrequencyHz, -0.1 * lw, 0.1 * lw);
            Assert.InRange(near.Intensity / t.Intensity, 0.9, 1.1);
        }
    }

    [Fact]
    public void The_stage_applies_only_to_two_cavities_on_a_widened_window_with_many_grid_lines()
    {
        var (sweeps, _) = Scenario();
        var grid = Unfolder.Run(sweeps, new UnfoldOptions { WindowStartHz = -150e9, WindowEndHz = 150e9 });
        var many = grid with { Lines = Enumerable.Range(0, 20).Select(i => new UnfoldedLine(i * 1e9, 0.5, 0.5, 100, i, i)).ToList(), OrdersResolved = true };
        var widened = new WindowFinding("simulated", -40e9, 40e9, 150e9, [], false);
        Assert.True(FewestLines.Applies(sweeps, many, widened));
        Assert.False(FewestLines.Applies(sweeps, many, null)); // no widening: the grid stands
        Assert.False(FewestLines.Applies(sweeps, many, widened with { StillWider = true })); // folded: orders not resolved
        Assert.False(FewestLines.Applies(sweeps.Where(s => s.Instrument.Name == "A").ToList(), many, widened)); // one cavity
        Assert.False(FewestLines.Applies(sweeps, many with { Lines = many.Lines.Take(5).ToList() }, widened)); // few lines
    }

    [Fact]
    public void A_grid_of_more_lines_than_a_line_fit_checks_tries_the_stage_without_widening()
    {
        var (sweeps, _) = Scenario();
        var grid = Unfolder.Run(sweeps, new UnfoldOptions { WindowStartHz = -150e9, WindowEndHz = 150e9 });
        var crowded = grid with { Lines = Enumerable.Range(0, UnfoldPipeline.MaxUnrefinedLines + 1).Select(i => new UnfoldedLine(i * 1e9, 0.5, 0.5, 100, i, i)).ToList(), OrdersResolved = true };
        Assert.True(FewestLines.AppliesToCrowdedGrid(sweeps, crowded, null));
        Assert.False(FewestLines.AppliesToCrowdedGrid(sweeps, crowded with { Lines = crowded.Lines.Skip(1).ToList() }, null)); // 40 lines: the line fit checks them
        Assert.False(FewestLines.AppliesToCrowdedGrid(sweeps, crowded, new WindowFinding("simulated", -40e9, 40e9, 150e9, [], false))); // widened: Applies decides
        Assert.False(FewestLines.AppliesToCrowdedGrid(sweeps.Where(s => s.Instrument.Name == "A").ToList(), crowded, null)); // one cavity
    }
}
