using OrderUnfold.Inversion;
using OrderUnfold.Pipeline;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>
/// The window is widened only for a first fit the model explains: a sweep with one glitch sample (simulated, as a
/// fuzzed file had it) leaves a reduced χ² far above the refusal threshold and lines at the window's edges, and a
/// widened solve would only repeat the refusal at twice the cost.
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
        UnfoldResult Unfold(UnfoldOptions o)
        {
            calls++;
            return Unfolder.Run(sweeps, o);
        }

        var (result, finding) = WindowWidening.Run(Unfold, new UnfoldOptions(), sweeps.Select(s => s.Instrument).ToList(), null);
        Assert.True(result.Sweeps.Max(s => s.ReducedChiSquare) > UnfoldPipeline.MismatchReducedChiSquare);
        Assert.NotNull(WindowWidening.WiderThanWindow(result, sweeps.Min(s => s.Instrument.LinewidthHz))); // it would have widened before
        Assert.Equal(1, calls);
        Assert.Null(finding);
    }
}
