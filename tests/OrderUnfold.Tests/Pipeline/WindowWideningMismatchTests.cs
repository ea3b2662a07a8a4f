using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>
/// The window is widened only for a first fit the model explains: a sweep with one glitch sample (simulated, as a
/// fuzzed file had it) leaves a reduced χ² far above the refusal threshold and lines at the window's edges, and a
/// widened solve would only repeat the refusal at twice the cost. The same fit stops its joint rounds after the second:
/// its χ² does not move, so the ten rounds left (0.8 s each) could not bring it under the threshold.
/// </summary>
public class WindowWideningMismatchTests
{
    [Fact]
    public void AFitTheModelCannotExplainIsNotWidened()
    {
        var sweeps = SimulatedSweeps.Calibrated(Scenarios.Demo(), useTrueAxis: true).ToList();
        var signal = (double[])sweeps[0].Signal.Clone();
        signal[signal.Length / 3] = 1e4 * signal.Max(); // one glitch sample
        sweeps[0] = sweeps[0] with { Signal = signal };
        var calls = 0;
        var rounds = 0;
        UnfoldResult Unfold(UnfoldOptions o)
        {
            calls++;
            return Unfolder.Run(sweeps, o, new CountRounds(() => rounds++));
        }

        var (result, finding) = WindowWidening.Run(Unfold, new UnfoldOptions(), sweeps.Select(s => s.Instrument).ToList(), null);
        Assert.True(result.Sweeps.Max(s => s.ReducedChiSquare) > UnfoldPipeline.MismatchReducedChiSquare);
        Assert.NotNull(WindowWidening.WiderThanWindow(result, sweeps.Min(s => s.Instrument.LinewidthHz))); // it would have widened before
        Assert.Equal(1, calls);
        Assert.Null(finding);
        Assert.Equal(2, rounds);
        Assert.Contains(result.Warnings, w => w.StartsWith("joint rounds stopped", StringComparison.Ordinal));
        // and the refusal names the glitch, with the sample and its value, instead of blaming the FSR
        var e = Assert.Throws<InputException>(() => RunChecks.RefuseMismatch(result, sweeps, "grid", false, "setup.toml"));
        Assert.Contains("glitch or spike", e.Message);
        Assert.Contains($"sample {signal.Length / 3 + 1} of the sweep", e.Message);
        Assert.DoesNotContain("stated FSR", e.Message);
    }

    /// <summary>The stopping rule itself: a fit stays above the threshold at the last round's rate, or does not.</summary>
    [Theory]
    [InlineData(6.57e8, 6.56e8, 11, true)] // the glitch: flat far above
    [InlineData(70, 70.5, 11, true)] // nearly flat just above: 70 × (70/70.5)¹¹ ≈ 64.7
    [InlineData(70, 71, 11, false)] // 70 × (70/71)¹¹ ≈ 59.9: could still get under
    [InlineData(1.3, 1.4, 11, false)] // a fit the model explains
    [InlineData(400, 2000, 11, false)] // an origin still being walked in: falls five-fold a round
    [InlineData(65, 80, 3, false)] // 65 × 0.81³ ≈ 35
    [InlineData(65, 80, 1, false)] // one round left: 65 × 0.81 ≈ 53
    [InlineData(65, 66, 1, true)] // one round left: 65 × 0.98 ≈ 64
    [InlineData(double.NaN, 66, 5, true)] // a fit that is no number at all
    public void TheRoundsStopOnlyWhenTheRateCannotReachAnExplainedFit(double worst, double previous, int roundsLeft, bool stops)
    {
        Assert.Equal(stops, JointSolve.CannotReachExplainedFit(worst, previous, roundsLeft) is not null);
    }

    /// <summary>After a solve that stopped at its iteration cap, a fit above the threshold stops the rounds at once; a
    /// first solve that converged goes on to a second, which gives the rate.</summary>
    [Theory]
    [InlineData(9.3e8, double.NaN, true, true)] // the glitch on 2 × 6 000 samples: the first solve capped
    [InlineData(9.3e8, double.NaN, false, false)] // converged: no rate yet
    [InlineData(30, double.NaN, true, false)] // capped but explained: the rounds may finish it
    public void ACappedSolveAboveTheThresholdStopsTheRounds(double worst, double previous, bool capped, bool stops)
    {
        Assert.Equal(stops, JointSolve.CannotReachExplainedFit(worst, previous, 12, capped) is not null);
    }

    private sealed class CountRounds(Action round) : IProgress<string>
    {
        public void Report(string value)
        {
            if (value.StartsWith("NNLS round", StringComparison.Ordinal)) round();
        }
    }
}
