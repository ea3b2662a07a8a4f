using OrderUnfold.Instruments;

namespace OrderUnfold.Calibration;

/// <summary>A family of extra peaks in a single-frequency sweep, at a fixed offset from the main peaks.</summary>
/// <param name="OffsetFsr">Offset from the main family as a fraction of the period, in (0, 1).</param>
/// <param name="RelativeHeight">Mean height relative to the main peaks.</param>
/// <param name="Count">Peaks of the family found.</param>
/// <param name="Periods">Periods the calibrated range covers (how many could have been found).</param>
public sealed record TransverseFamily(double OffsetFsr, double RelativeHeight, int Count, int Periods)
{
    /// <summary>True for the half-period family (the odd transverse modes of a confocal cavity).</summary>
    public bool HalfPeriod => Math.Abs(OffsetFsr - 0.5) < 0.04;
}

/// <summary>What <see cref="TransverseModes.Detect"/> saw.</summary>
/// <param name="Families">Extra peak families, strongest first.</param>
/// <param name="MainPeaks">Peaks of the main family.</param>
/// <param name="AlternationRatio">Mean height of the weaker to the stronger of the even and odd orders of the main family
/// (1 when they are equal; a low value means every second peak belongs to another transverse family).</param>
/// <param name="Warnings">Plain-language findings.</param>
public sealed record TransverseModeReport(IReadOnlyList<TransverseFamily> Families, int MainPeaks, double? AlternationRatio, IReadOnlyList<string> Warnings);

/// <summary>
/// Looks for transverse-mode peaks in a single-frequency (calibration-laser) sweep: peaks that recur every period at
/// a fixed offset from the main peaks. A misaligned or not mode-matched cavity shows them; in a confocal cavity the
/// odd transverse modes form a family half a period (c/4L) from the even ones, and the two families overlap less
/// well when the spacing is not exactly confocal, which lowers the apparent finesse.
/// </summary>
public static class TransverseModes
{
    /// <summary>Checks a calibration sweep on its calibrated axis.</summary>
    /// <param name="sweep">The single-frequency sweep.</param>
    /// <param name="axis">Its axis f(x) in Hz.</param>
    /// <param name="instrument">The cavity (geometry and stated finesse for the messages).</param>
    /// <param name="periodHz">Spacing of the main peaks on that axis (FSR, times λ_cal/λ_source for another laser).</param>
    /// <param name="measuredFinesse">Effective finesse measured from the peaks, to report a drop against the stated one.</param>
    public static TransverseModeReport Detect(Sweep sweep, AxisPolynomial axis, Instrument instrument, double periodHz, double? measuredFinesse = null)
    {
        var warnings = new List<string>();
        var lo = axis.XMin - 0.02 * (axis.XMax - axis.XMin);
        var hi = axis.XMax + 0.02 * (axis.XMax - axis.XMin);
        var peaks = ResolvedPeaks.Find(sweep.X, sweep.Y, 0.03, 6).Where(p => p.X >= lo && p.X <= hi).ToList();
        if (peaks.Count < 2) return new TransverseModeReport([], peaks.Count, null, warnings);
        var strongest = peaks.MaxBy(p => p.Height)!;
        var f0 = axis.Evaluate(strongest.X);
        var finesse = measuredFinesse ?? instrument.Finesse;
        var tolerance = Math.Max(2.0 / finesse, 0.01); // in periods
        var items = peaks.Select(p =>
        {
            var u = (axis.Evaluate(p.X) - f0) / periodHz;
            var order = (int)Math.Round(u);
            var q = u - Math.Floor(u); // [0, 1)
            return (Peak: p, Order: order, Q: q, Main: Math.Abs(u - order) < tolerance);
        }).ToList();
        var main = items.Where(i => i.Main).ToList();
        var mainHeight = main.Average(i => i.Peak.Height);
        var fSpan = Math.Abs(axis.Evaluate(axis.XMax) - axis.Evaluate(axis.XMin));
        var periods = Math.Max(1, (int)Math.Floor(fSpan / periodHz));

        // cluster the others by their fractional offset
        var families = new List<TransverseFamily>();
        var rest = items.Where(i => !i.Main).OrderBy(i => i.Q).ToList();
        var k = 0;
        while (k < rest.Count)
        {
            var group = new List<(Peak Peak, int Order, double Q, bool Main)> { rest[k] };
            while (k + 1 < rest.Count && rest[k + 1].Q - group[^1].Q < tolerance) group.Add(rest[++k]);
            k++;
            if (group.Count < 2 && periods > 2) continue; // a single stray peak is noise or a glitch, not a family
            families.Add(new TransverseFamily(group.Average(g => g.Q), group.Average(g => g.Peak.Height) / mainHeight, group.Count, periods));
        }

        families = families.OrderByDescending(f => f.RelativeHeight * f.Count).ToList();
        foreach (var fam in families)
        {
            if (fam.HalfPeriod)
            {
                var confocal = instrument.Geometry == CavityGeometry.Confocal
                    ? "the odd transverse modes of the confocal cavity: the beam is not mode-matched (misaligned), or the FSR stated is c/2L where this cavity shows peaks every c/4L"
                    : "a transverse-mode family half an FSR from the main peaks: the beam is misaligned, or the cavity is close to confocal";
                warnings.Add($"{sweep.Name}: {fam.Count} extra peaks at half the FSR ({100 * fam.RelativeHeight:F0} % of the main height): {confocal}");
            }
            else
            {
                warnings.Add($"{sweep.Name}: {fam.Count} extra peaks at {fam.OffsetFsr:F3} FSR from the main peaks ({100 * fam.RelativeHeight:F0} % of the main height): transverse modes of a misaligned beam");
            }
        }

        // even and odd orders of the main family
        double? alternation = null;
        var even = main.Where(i => (i.Order & 1) == 0).Select(i => i.Peak.Height).ToList();
        var odd = main.Where(i => (i.Order & 1) != 0).Select(i => i.Peak.Height).ToList();
        if (even.Count >= 2 && odd.Count >= 2)
        {
            var a = even.Average();
            var b = odd.Average();
            alternation = Math.Min(a, b) / Math.Max(a, b);
            if (alternation < 0.75)
                warnings.Add($"{sweep.Name}: the calibration peaks alternate in height (weaker to stronger {alternation:F2}): every second peak belongs to another transverse family, " +
                             (instrument.Geometry == CavityGeometry.Confocal
                                 ? "as in a confocal cavity that is partly mode-matched; the peaks are still one FSR (c/4L) apart"
                                 : "so the cavity may be confocal-like with an FSR half the stated one; check the geometry"));
        }

        if (measuredFinesse is double mf)
        {
            var drop = 1 - mf / instrument.Finesse;
            if (drop > 0.2)
                warnings.Add($"{sweep.Name}: apparent finesse {mf:F0} is {100 * drop:F0} % below the stated {instrument.Finesse:F0}" +
                             (families.Count > 0 ? "; with the transverse modes seen, the alignment is the likely cause" : "; realign the cavity or state the measured finesse"));
            if (instrument.Geometry == CavityGeometry.Confocal && mf > 1.6 * instrument.Finesse && mf < 2.5 * instrument.Finesse)
                warnings.Add($"{sweep.Name}: apparent finesse {mf:F0} is about twice the stated {instrument.Finesse:F0}: a mode-matched confocal cavity shows peaks only every c/2L, twice the stated FSR; check the geometry and the FSR");
        }

        return new TransverseModeReport(families, main.Count, alternation, warnings);
    }
}
