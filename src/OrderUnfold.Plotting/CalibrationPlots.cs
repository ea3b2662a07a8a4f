using OrderUnfold.Calibration;
using OrderUnfold.Instruments;

namespace OrderUnfold.Plotting;

/// <summary>
/// The plots of a calibration, per axis: the axis polynomial with its calibration points and the residuals in MHz,
/// the Airy fit over one peak, and the averaged peak shape against the Airy profile.
/// </summary>
public static class CalibrationPlots
{
    /// <summary>Writes the PNGs of every axis into <paramref name="directory"/> and returns their paths.</summary>
    /// <param name="axes">The calibrated axes.</param>
    /// <param name="directory">Output folder (created if needed).</param>
    public static IReadOnlyList<string> Write(IEnumerable<AxisCalibration> axes, string directory)
    {
        Directory.CreateDirectory(directory);
        return Plans(axes).Select(p => p.Save(directory)).ToList();
    }

    /// <summary>The same figures as <see cref="Write"/>, as inline SVG for report.html.</summary>
    public static IReadOnlyList<Pipeline.SvgFigure> Svg(IEnumerable<AxisCalibration> axes) => Plans(axes).SelectMany(p => p.Svg()).ToList();

    private static List<FigurePlan> Plans(IEnumerable<AxisCalibration> axes)
    {
        var plans = new List<FigurePlan>();
        var used = new HashSet<string>(StringComparer.Ordinal);
        foreach (var a in axes)
        {
            var dir = a.Direction.ToString().ToLowerInvariant();
            var slug = Slug($"{a.Instrument}-{dir}");
            var unique = slug;
            for (var k = 2; !used.Add(unique); k++) unique = $"{slug}-{k}";
            var name = $"{a.Instrument}, {dir} ramp";
            if (a.PointCount > 0) plans.Add(AxisPlan(a, dir, unique, name));
            var f = a.FinesseDetail;
            if (f?.Representative is { } peak)
            {
                var input = new FinessePlotInput($"Airy fit over a peak of {a.Instrument} ({dir} ramp); finesse below: weighted mean of {f.Peaks.Count} peak(s)",
                    peak.DetuningHz, peak.Measured, peak.Model, f.Finesse, f.Sigma);
                plans.Add(new FigurePlan($"finesse-{unique}.png", $"Airy fit over one peak, {name}", Pipeline.FigureTopic.Calibration, Plots.FinesseFitSize,
                    () => Plots.BuildFinesseFit(input)));
            }

            if (f?.Profile is { } profile && f.PeriodHz > 0 && ProfilePlan(a, f, profile, dir, unique, name) is { } plan) plans.Add(plan);
        }

        return plans;
    }

    private static FigurePlan AxisPlan(AxisCalibration a, string dir, string unique, string name)
    {
        var how = a.FromRepeats ? $"self-calibrated from {a.PairsUsed} repeat pairs" : "from the calibration sweep";
        var xs = Enumerable.Range(0, 240).Select(i => a.Axis.XMin + (a.Axis.XMax - a.Axis.XMin) * i / 239.0).ToArray();
        var xLabel = a.FromRepeats ? "scan coordinate x of the repeat (time from segment start, s, or ramp, V)" : "scan coordinate x (time from segment start, s, or ramp, V)";
        var input = new AxisPlotInput($"Sweep axis of {a.Instrument} ({dir} ramp), {how}, degree {a.Axis.Degree}",
            xLabel, a.PointX, a.PointHz, xs, a.Axis.Evaluate(xs), a.ResidualHz);
        return new FigurePlan($"axis-{unique}.png", $"Scan axis and its residuals, {name}", Pipeline.FigureTopic.Calibration, Plots.AxisCalibrationSize,
            () => Plots.BuildAxisCalibration(input));
    }

    private static FigurePlan? ProfilePlan(AxisCalibration a, FinesseEstimate f, InstrumentProfile profile, string dir, string unique, string name)
    {
        var fwhm = Airy.ExactFwhm(f.PeriodHz, f.Finesse);
        var keep = Enumerable.Range(0, profile.DetuningFwhm.Length).Where(i => double.IsFinite(profile.Measured[i])).ToArray();
        if (keep.Length < 2) return null;
        var input = new FinessePlotInput(
            $"Averaged peak shape of {a.Instrument} ({dir} ramp) against the Airy profile " + (profile.AiryShaped ? "(Airy-shaped)" : "(NOT Airy-shaped)"),
            keep.Select(i => profile.DetuningFwhm[i] * fwhm).ToArray(), keep.Select(i => profile.Measured[i]).ToArray(),
            keep.Select(i => profile.Airy[i]).ToArray(), f.Finesse, f.Sigma);
        return new FigurePlan($"profile-{unique}.png", $"Averaged peak shape against the Airy profile, {name}", Pipeline.FigureTopic.Calibration,
            Plots.FinesseFitSize, () => Plots.BuildFinesseFit(input));
    }

    private static string Slug(string name)
    {
        var chars = name.ToLowerInvariant().Select(c => char.IsLetterOrDigit(c) ? c : '-').ToArray();
        return string.Join('-', new string(chars).Split('-', StringSplitOptions.RemoveEmptyEntries));
    }
}
