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
        var written = new List<string>();
        var used = new HashSet<string>(StringComparer.Ordinal);
        foreach (var a in axes)
        {
            var dir = a.Direction.ToString().ToLowerInvariant();
            var slug = Slug($"{a.Instrument}-{dir}");
            var unique = slug;
            for (var k = 2; !used.Add(unique); k++) unique = $"{slug}-{k}";
            var how = a.FromRepeats ? $"self-calibrated from {a.PairsUsed} repeat pairs" : "from the calibration sweep";
            if (a.PointCount > 0)
            {
                var xs = Enumerable.Range(0, 240).Select(i => a.Axis.XMin + (a.Axis.XMax - a.Axis.XMin) * i / 239.0).ToArray();
                var p = Path.Combine(directory, $"axis-{unique}.png");
                var xLabel = a.FromRepeats ? "scan coordinate x of the repeat (time from segment start, s, or ramp, V)" : "scan coordinate x (time from segment start, s, or ramp, V)";
                Plots.SaveAxisCalibration(p, new AxisPlotInput($"Sweep axis of {a.Instrument} ({dir} ramp), {how}, degree {a.Axis.Degree}",
                    xLabel, a.PointX, a.PointHz, xs, a.Axis.Evaluate(xs), a.ResidualHz));
                written.Add(p);
            }

            var f = a.FinesseDetail;
            if (f?.Representative is { } peak)
            {
                var p = Path.Combine(directory, $"finesse-{unique}.png");
                Plots.SaveFinesseFit(p, new FinessePlotInput(
                    $"Airy fit over a peak of {a.Instrument} ({dir} ramp); finesse below: weighted mean of {f.Peaks.Count} peak(s)",
                    peak.DetuningHz, peak.Measured, peak.Model, f.Finesse, f.Sigma));
                written.Add(p);
            }

            if (f?.Profile is { } profile && f.PeriodHz > 0)
            {
                var fwhm = Airy.ExactFwhm(f.PeriodHz, f.Finesse);
                var keep = Enumerable.Range(0, profile.DetuningFwhm.Length).Where(i => double.IsFinite(profile.Measured[i])).ToArray();
                if (keep.Length >= 2)
                {
                    var p = Path.Combine(directory, $"profile-{unique}.png");
                    Plots.SaveFinesseFit(p, new FinessePlotInput(
                        $"Averaged peak shape of {a.Instrument} ({dir} ramp) against the Airy profile " + (profile.AiryShaped ? "(Airy-shaped)" : "(NOT Airy-shaped)"),
                        keep.Select(i => profile.DetuningFwhm[i] * fwhm).ToArray(), keep.Select(i => profile.Measured[i]).ToArray(),
                        keep.Select(i => profile.Airy[i]).ToArray(), f.Finesse, f.Sigma));
                    written.Add(p);
                }
            }
        }

        return written;
    }

    private static string Slug(string name)
    {
        var chars = name.ToLowerInvariant().Select(c => char.IsLetterOrDigit(c) ? c : '-').ToArray();
        return string.Join('-', new string(chars).Split('-', StringSplitOptions.RemoveEmptyEntries));
    }
}
