using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Analysis;

/// <summary>
/// The grid stage hands the refinement candidates down to <see cref="LineRefiner.CandidateMinSnr"/>: weak lines that the L1
/// shrinkage pushes below the final threshold on the grid still reach the refinement, and noise does not turn into lines.
/// SIMULATED sweeps: one cavity (FSR 1 GHz, finesse 100), 2 000 samples over 3 FSR, white noise σ = 0.01, exact σ given.
/// </summary>
public class CandidateThresholdTests(ITestOutputHelper output)
{
    private static readonly Instrument Cavity = new("A", 1.0e9, 100);

    private static CalibratedSweep Sweep(int seed, double weak) =>
        RefinerFixtures.Sweep("A", new RefinerFixtures.FixtureSweep(Cavity, 2000, 3, 0), [new(0.2e9, 1.0), new(0.55e9, weak)], new Random(seed));

    private static (int WeakFound, int Extra) Run(double weak, double gridMinSnr, int seeds)
    {
        int found = 0, extra = 0;
        for (var seed = 1; seed <= seeds; seed++)
        {
            var sweep = Sweep(seed, weak);
            var grid = Unfolder.Run([sweep], new UnfoldOptions { MinSnr = gridMinSnr });
            var (result, _) = LineRefiner.Refine([sweep], grid, new RefineOptions { MinSnr = 5 });
            var hits = result.Lines.Count(l => Math.Abs(Math.Abs(l.FrequencyHz) - 0.35e9) < 5e6);
            found += hits > 0 ? 1 : 0;
            extra += result.Lines.Count - 1 - hits;
        }

        return (found, extra);
    }

    [Fact]
    public void WeakLinesReachTheRefinementAndNoiseDoesNot()
    {
        var candidate = LineRefiner.CandidateMinSnr(5, new UnfoldOptions().Sparsity);
        Assert.Equal(2, candidate);
        // a second line of amplitude 0.018 has a refined SNR of about 7 here: above the refinement's threshold of 5
        var (withCandidates, extraWith) = Run(0.018, candidate, 20);
        var (gridOnly, _) = Run(0.018, 5, 20);
        var (_, extraNoise) = Run(0, candidate, 20);
        output.WriteLine($"weak line found: {withCandidates}/20 with candidates from grid SNR {candidate}, {gridOnly}/20 with grid SNR 5; extra lines {extraWith} (weak line present), {extraNoise} (absent)");
        Assert.True(withCandidates >= 18, $"found {withCandidates}/20");
        Assert.True(gridOnly <= 8, $"the grid threshold alone found {gridOnly}/20: the case no longer shows the shrinkage");
        Assert.Equal(0, extraWith);
        Assert.Equal(0, extraNoise);
    }
}
