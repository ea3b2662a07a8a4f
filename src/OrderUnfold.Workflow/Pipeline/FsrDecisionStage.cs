using OrderUnfold.Calibration;
using OrderUnfold.Inversion;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline;

/// <summary>
/// The stage that decides each instrument's FSR from the lines when the setup asks for it (refine_fsr = true, or a
/// known_interval), before the unfold whose results are reported. The search (<see cref="FsrRefiner.Decide"/>) runs on
/// trial sweeps built at the FSRs settled from the calibration evidence (<see cref="InstrumentSettlement"/>): its folded-peak
/// pre-scan, its trial unfolds at trial scales and its per-instrument line fits are all part of the search. Only the
/// decision leaves it (FSR, basis and uncertainty per instrument); <see cref="InstrumentSettlement.WithDecidedFsr"/> then
/// puts every axis at the decided FSR once, and the sweeps of the results are built from those axes
/// (<see cref="SourceSweeps.Build"/>). The price is one unfold more than reusing the search's last trial unfold would cost.
/// </summary>
internal static class FsrDecisionStage
{
    /// <summary>The FSR decision, or null when the setup asks for none (the calibration's settlement stands).</summary>
    public static FsrRefinement? Run(Setup setup, SourceSegments segments, SettledInstruments settled, UnfoldOptions options, IProgress<string>? progress,
        CancellationToken cancellationToken)
    {
        if (!setup.Solve.RefineFsr && setup.Solve.KnownIntervalHz is null) return null;
        progress?.Report("refining the FSRs from the lines");
        var trial = SourceSweeps.Build(setup, segments, settled);
        return FsrRefiner.Decide(trial.Sweeps, options, new FsrRefineOptions { RefineRatio = setup.Solve.RefineFsr, KnownIntervalHz = setup.Solve.KnownIntervalHz }, progress, cancellationToken);
    }
}
