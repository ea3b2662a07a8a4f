using OrderUnfold.Analysis.Modes;

namespace OrderUnfold.Pipeline;

/// <summary>Builds the laser-mode analysis input from an unfold run (the same content as its lines.csv and report.json).</summary>
public static class ModeInputs
{
    public static ModeInput FromRun(UnfoldRun run)
    {
        var r = run.Result;
        var lines = r.Lines.Select(l => new ModeInputLine(l.FrequencyHz, l.FrequencySigmaHz, l.Intensity,
            double.IsFinite(l.IntensityError) ? l.IntensityError : null, double.IsFinite(l.Snr) ? l.Snr : null)).ToList();
        return new ModeInput(lines, DetectionLimit(r), r.OrdersResolved, r.OrdersResolved ? null : run.Instruments[0].FsrHz,
            run.Setup.Solve.AnchorFrequencyHz);
    }

    /// <summary>The largest detection limit over the window (relative to the strongest line): "no side mode" then means none
    /// above this anywhere in the window, a conservative bound.</summary>
    public static double? DetectionLimit(Inversion.UnfoldResult r)
    {
        if (r.DetectionLimit is null) return null;
        var finite = r.DetectionLimit.Where(double.IsFinite).ToList();
        return finite.Count > 0 ? finite.Max() : null;
    }
}
