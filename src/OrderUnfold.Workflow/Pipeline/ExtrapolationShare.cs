using OrderUnfold.Instruments;
using OrderUnfold.Inversion;

namespace OrderUnfold.Pipeline;

/// <summary>
/// Adds to each line's frequency uncertainty the part that comes from samples whose axis is extrapolated beyond the
/// calibration points (<see cref="CalibratedSweep.ExtrapolationSigmaHz"/>). A line's position follows its peaks'
/// samples weighted by how strongly they pin it, the squared slope of the Airy profile at their detuning; an axis
/// error that varies smoothly along the sweep moves the line by the weighted mean of the errors there, so that mean
/// (over all sweeps) is taken as the extra standard uncertainty and combined in quadrature with the line's own and
/// the anchor's. Lines pinned only by samples inside the calibrated range are unchanged.
/// </summary>
public static class ExtrapolationShare
{
    /// <summary>The result with line sigmas widened where extrapolated samples carry them.</summary>
    public static UnfoldResult Apply(UnfoldResult result, IReadOnlyList<CalibratedSweep> sweeps)
    {
        if (sweeps.All(s => s.ExtrapolationSigmaHz is null) || result.Lines.Count == 0) return result;
        var extra = result.Lines.Select(l => Share(l.FrequencyHz, result, sweeps)).ToArray();
        var anchor = result.Lines.Select((l, i) => (l, i)).Where(p => p.l.FrequencyHz == 0).Select(p => extra[p.i]).DefaultIfEmpty(0).First();
        var lines = result.Lines.Select((l, i) =>
        {
            if (l.FrequencyHz == 0 || l.FrequencySigmaHz is not double sigma) return l;
            var add2 = extra[i] * extra[i] + anchor * anchor;
            if (add2 <= 0) return l;
            var axis = l.FrequencyAxisSigmaHz ?? 0;
            return l with
            {
                FrequencySigmaHz = Math.Sqrt(sigma * sigma + add2),
                FrequencyAxisSigmaHz = Math.Sqrt(axis * axis + add2),
            };
        }).ToList();
        return result with { Lines = lines };
    }

    private static double Share(double lineHz, UnfoldResult result, IReadOnlyList<CalibratedSweep> sweeps)
    {
        double num = 0, den = 0;
        for (var k = 0; k < sweeps.Count && k < result.Sweeps.Count; k++)
        {
            var sw = sweeps[k];
            var fsr = sw.Instrument.FsrHz;
            var coefficient = Airy.CoefficientOfFinesse(sw.Instrument.Finesse);
            var offset = result.Sweeps[k].OffsetHz;
            var ext = sw.ExtrapolationSigmaHz;
            for (var i = 0; i < sw.ScanHz.Length; i++)
            {
                var phase = Math.PI * (lineHz - offset - sw.ScanHz[i]) / fsr;
                var s = Math.Sin(phase);
                var denom = 1 + coefficient * s * s;
                var slope = coefficient * Math.Sin(2 * phase) / (denom * denom); // ∝ dT/dν
                var gain = result.Sweeps[k].Gain;
                var w = gain * gain * slope * slope / (sw.NoiseSigma * sw.NoiseSigma);
                den += w;
                if (ext is not null) num += w * ext[i];
            }
        }

        return den > 0 ? num / den : 0;
    }
}
