using OrderUnfold.Inversion;
using OrderUnfold.Units;

namespace OrderUnfold.Calibration;

/// <summary>
/// One round of the FSR refinement's estimate: each instrument's sweeps fitted alone (<see cref="InstrumentLineFitter"/>),
/// then the Vernier ratio of each instrument to the reference (the slope of its line positions against the reference's)
/// and the known interval each instrument measures in its own scale, combined into one scale correction per instrument.
/// </summary>
internal static class FsrScaleEstimator
{
    /// <summary>A line of the joint unfold as the refinement uses it (neighbours closer than 1.5 linewidths merged).</summary>
    internal sealed record MergedLine(double Frequency, double Intensity);

    /// <summary>A round's result.</summary>
    /// <param name="Scales">Scale correction, its relative σ and its basis, per instrument (empty: nothing to apply).</param>
    /// <param name="Intervals">Line pairs matched to the known interval.</param>
    /// <param name="Fits">The per-instrument line fits.</param>
    /// <param name="Warnings">What looked wrong.</param>
    /// <param name="Notes">What was measured.</param>
    internal sealed record Estimation(Dictionary<string, (double Scale, double RelativeSigma, string Basis)> Scales, List<IntervalMatch> Intervals,
        List<InstrumentLineFit> Fits, List<string> Warnings, List<string> Notes);

    private sealed record Ratio(double R, double Sigma, int Used);

    private sealed record RatioStep(Dictionary<string, Ratio> Ratios, List<string> Warnings, List<string> Notes);

    private sealed record IntervalStep(Dictionary<string, (double Scale, double Rel)> Own, List<IntervalMatch> Intervals, List<string> Warnings, List<string> Notes);

    /// <summary>Estimates the scale corrections from the lines of <paramref name="result"/> (with <paramref name="ratio"/>,
    /// the Vernier ratios too); the line fits spend <paramref name="budget"/>.</summary>
    internal static Estimation Estimate(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult result, FsrRefineOptions options, bool ratio,
        WorkBudget? budget = null)
    {
        var narrow = sweeps.Min(s => s.Instrument.LinewidthHz);
        var lines = MergeLines(result.Lines.Where(l => l.Snr >= options.MinSnr).ToList(), 1.5 * narrow).OrderByDescending(l => l.Intensity).Take(options.MaxLines)
            .OrderBy(l => l.Frequency).ToList();
        if (lines.Count < 2)
            return new Estimation([], [], [], [$"FSR refinement needs at least two lines above SNR {options.MinSnr:F0}; found {lines.Count}: FSRs left as stated"], []);

        var anchor = lines.IndexOf(lines.MaxBy(l => l.Intensity)!);
        var names = sweeps.Select(s => s.Instrument.Name).Distinct().ToList();
        var reference = options.ReferenceInstrument ?? names[0];
        var fits = names.Select(n => InstrumentLineFitter.Fit(sweeps.Where(s => s.Instrument.Name == n).ToList(), result, lines, anchor, budget)).ToList();
        var refFit = fits.First(f => f.Instrument == reference);

        var ratios = VernierRatios(fits, refFit, lines.Count, anchor, reference, ratio);
        var interval = options.KnownIntervalHz is double known
            ? KnownInterval(fits, refFit, lines, known, options, narrow)
            : new IntervalStep([], [], [], []);
        var (scales, combineWarnings) = ratio
            ? (ScalesFromRatios(names, reference, ratios.Ratios, interval.Own), new List<string>())
            : ScalesFromOwnIntervals(names, interval.Own);
        return new Estimation(scales, interval.Intervals, fits, [.. ratios.Warnings, .. interval.Warnings, .. combineWarnings], [.. ratios.Notes, .. interval.Notes]);
    }

    /// <summary>Vernier ratios νᵏ = r·νʳᵉᶠ of each instrument to the reference, both anchored at the same line (the
    /// reference's ratio is 1); only the reference's without <paramref name="ratio"/>.</summary>
    private static RatioStep VernierRatios(List<InstrumentLineFit> fits, InstrumentLineFit refFit, int lineCount, int anchor, string reference, bool ratio)
    {
        var ratios = new Dictionary<string, Ratio> { [reference] = new Ratio(1, 0, lineCount) };
        var warnings = new List<string>();
        var notes = new List<string>();
        if (!ratio) return new RatioStep(ratios, warnings, notes);
        foreach (var f in fits.Where(f => f.Instrument != reference))
        {
            var (r, sum, used) = WeightedSlope(f, refFit, lineCount, anchor);
            if (used == 0 || !(sum > 0))
            {
                warnings.Add($"instrument '{f.Instrument}': no line could be measured well enough in both it and '{reference}' to refine the FSR ratio");
                continue;
            }

            double chi = 0;
            for (var j = 0; j < lineCount; j++)
            {
                if (j == anchor) continue;
                var var = f.Covariance[j, j] + r * r * refFit.Covariance[j, j];
                if (!(var > 0) || !double.IsFinite(var)) continue;
                chi += Math.Pow(f.FrequencyHz[j] - r * refFit.FrequencyHz[j], 2) / var;
            }

            var reduced = used > 1 ? chi / (used - 1) : 1;
            var sigma = Math.Sqrt(1 / sum) * Math.Sqrt(Math.Max(1, reduced));
            ratios[f.Instrument] = new Ratio(r, sigma, used);
            if (used > 1 && reduced > 9)
                warnings.Add($"instrument '{f.Instrument}': the line positions do not follow one FSR ratio against '{reference}' (χ²/dof {reduced:F1}); an axis calibration may be poor or a line misplaced");
            notes.Add($"FSR ratio {f.Instrument}/{reference} refined from {used} line(s): frequencies in '{f.Instrument}' were {(r - 1) * 100:+0.0000;-0.0000} % ± {sigma * 100:0.0000} % off against '{reference}'");
        }

        return new RatioStep(ratios, warnings, notes);
    }

    /// <summary>The slope r of one instrument's positions against the reference's through the anchor, weighted by the
    /// variances at the current slope (three passes); also Σw·x² and the lines used.</summary>
    private static (double R, double Sum, int Used) WeightedSlope(InstrumentLineFit f, InstrumentLineFit refFit, int lineCount, int anchor)
    {
        var r = 1.0;
        double sum = 0;
        var used = 0;
        for (var pass = 0; pass < 3; pass++)
        {
            double swxy = 0, swxx = 0;
            sum = 0;
            used = 0;
            for (var j = 0; j < lineCount; j++)
            {
                if (j == anchor) continue;
                var var = f.Covariance[j, j] + r * r * refFit.Covariance[j, j];
                if (!(var > 0) || !double.IsFinite(var)) continue;
                var w = 1 / var;
                swxy += w * f.FrequencyHz[j] * refFit.FrequencyHz[j];
                swxx += w * refFit.FrequencyHz[j] * refFit.FrequencyHz[j];
                used++;
            }

            if (swxx > 0) r = swxy / swxx;
            sum = swxx;
        }

        return (r, sum, used);
    }

    /// <summary>The known interval as each instrument measures it in its own scale, from the line pairs it separates.</summary>
    private static IntervalStep KnownInterval(List<InstrumentLineFit> fits, InstrumentLineFit refFit, List<MergedLine> lines, double known, FsrRefineOptions options, double narrow)
    {
        var own = new Dictionary<string, (double Scale, double Rel)>();
        var intervals = new List<IntervalMatch>();
        var pairs = MatchIntervals(lines, known, options, narrow);
        if (pairs.Count == 0)
            return new IntervalStep(own, intervals,
                [$"no pair of lines is separated by the known interval {Quantity.FormatFrequency(known)} (or up to {options.MaxIntervalMultiple} times it) within {100 * options.IntervalTolerance:F1} %: the absolute FSR was not calibrated"], []);
        foreach (var f in fits)
        {
            double sw = 0, swv = 0;
            foreach (var (i, j, m) in pairs)
            {
                var d = f.FrequencyHz[j] - f.FrequencyHz[i];
                var var = f.Covariance[i, i] + f.Covariance[j, j] - 2 * f.Covariance[i, j];
                if (!(var > 0) || !double.IsFinite(var) || !(d > 0)) continue;
                var rel = Math.Sqrt(var) / d;
                sw += 1 / (rel * rel);
                swv += m * known / d / (rel * rel);
            }

            if (sw > 0) own[f.Instrument] = (swv / sw, Math.Sqrt(1 / sw));
        }

        foreach (var (i, j, m) in pairs)
        {
            var var = refFit.Covariance[i, i] + refFit.Covariance[j, j] - 2 * refFit.Covariance[i, j];
            intervals.Add(new IntervalMatch(lines[i].Frequency, lines[j].Frequency, m, m * known, lines[j].Frequency - lines[i].Frequency,
                double.IsFinite(var) ? Math.Sqrt(Math.Max(0, var)) : double.NaN));
        }

        return own.Count == 0
            ? new IntervalStep(own, intervals, ["the line pairs matched to the known interval could not be measured in any single instrument: the absolute FSR was not calibrated"], [])
            : new IntervalStep(own, intervals, [], [$"{pairs.Count} line pair(s) matched to the known interval {Quantity.FormatFrequency(known)} (or a multiple): " +
                                                   string.Join("; ", own.Select(o => $"'{o.Key}' scale {(o.Value.Scale - 1) * 100:+0.0000;-0.0000} % ± {o.Value.Rel * 100:0.0000} %"))]);
    }

    /// <summary>With the Vernier ratios: one absolute scale for the reference, from every instrument's interval referred to
    /// it by its ratio (the stated FSR of the reference without an interval); each instrument's scale follows by its ratio.</summary>
    private static Dictionary<string, (double Scale, double RelativeSigma, string Basis)> ScalesFromRatios(List<string> names, string reference,
        Dictionary<string, Ratio> ratios, Dictionary<string, (double Scale, double Rel)> own)
    {
        double refScale = 1, refRel = 0;
        var absolute = false;
        double sw = 0, swv = 0;
        foreach (var (n, o) in own)
        {
            if (!ratios.TryGetValue(n, out var rr)) continue;
            var rel = Math.Sqrt(o.Rel * o.Rel + Math.Pow(rr.Sigma / rr.R, 2));
            sw += 1 / (rel * rel);
            swv += o.Scale * rr.R / (rel * rel);
        }

        if (sw > 0)
        {
            refScale = swv / sw;
            refRel = Math.Sqrt(1 / sw);
            absolute = true;
        }

        var scales = new Dictionary<string, (double Scale, double RelativeSigma, string Basis)>();
        foreach (var n in names)
        {
            if (!ratios.TryGetValue(n, out var rr)) continue;
            var rel = Math.Sqrt(refRel * refRel + Math.Pow(rr.Sigma / rr.R, 2));
            var basis = n == reference
                ? absolute ? "known interval" : "reference (stated FSR)"
                : absolute ? "Vernier ratio and known interval" : $"Vernier ratio to '{reference}'";
            scales[n] = (refScale / rr.R, rel, basis);
        }

        return scales;
    }

    /// <summary>Without the ratios: each instrument on its own interval; one that cannot see an interval takes the others'
    /// mean scale, with a warning.</summary>
    private static (Dictionary<string, (double Scale, double RelativeSigma, string Basis)> Scales, List<string> Warnings) ScalesFromOwnIntervals(
        List<string> names, Dictionary<string, (double Scale, double Rel)> own)
    {
        var scales = new Dictionary<string, (double Scale, double RelativeSigma, string Basis)>();
        var warnings = new List<string>();
        if (own.Count == 0) return (scales, warnings);
        var meanScale = own.Values.Sum(o => o.Scale / (o.Rel * o.Rel)) / own.Values.Sum(o => 1 / (o.Rel * o.Rel));
        foreach (var n in names)
        {
            if (own.TryGetValue(n, out var o)) scales[n] = (o.Scale, o.Rel, "known interval");
            else
            {
                scales[n] = (meanScale, Math.Sqrt(1 / own.Values.Sum(v => 1 / (v.Rel * v.Rel))), "known interval (seen by other instruments)");
                warnings.Add($"instrument '{n}' could not measure the known interval on its own; it takes the scale of the other instruments");
            }
        }

        return (scales, warnings);
    }

    /// <summary>Lines closer than <paramref name="distance"/> merged into their intensity-weighted mean, in frequency order.</summary>
    private static List<MergedLine> MergeLines(List<UnfoldedLine> lines, double distance)
    {
        var sorted = lines.OrderBy(l => l.FrequencyHz).ToList();
        var merged = new List<MergedLine>();
        foreach (var l in sorted)
        {
            if (merged.Count > 0 && l.FrequencyHz - merged[^1].Frequency < distance)
            {
                var m = merged[^1];
                var total = m.Intensity + l.Intensity;
                merged[^1] = new MergedLine((m.Frequency * m.Intensity + l.FrequencyHz * l.Intensity) / total, total);
            }
            else
            {
                merged.Add(new MergedLine(l.FrequencyHz, l.Intensity));
            }
        }

        return merged;
    }

    /// <summary>Pairs (i, j, multiple) with νⱼ − νᵢ close to multiple × interval, all implying one common scale.</summary>
    private static List<(int I, int J, int M)> MatchIntervals(List<MergedLine> lines, double known, FsrRefineOptions options, double linewidth)
    {
        var cands = new List<(int I, int J, int M, double S)>();
        for (var i = 0; i < lines.Count; i++)
            for (var j = i + 1; j < lines.Count; j++)
            {
                var d = lines[j].Frequency - lines[i].Frequency;
                for (var m = 1; m <= options.MaxIntervalMultiple; m++)
                {
                    var target = m * known;
                    if (Math.Abs(d - target) <= options.IntervalTolerance * target + 2 * linewidth) cands.Add((i, j, m, target / d));
                }
            }

        if (cands.Count == 0) return [];
        // keep the largest group of candidates that agree on the scale to within a linewidth over the interval
        var best = new List<(int, int, int)>();
        foreach (var c in cands)
        {
            var tol = 1.5 * linewidth / (c.M * known);
            var group = cands.Where(o => Math.Abs(o.S - c.S) <= tol).Select(o => (o.I, o.J, o.M)).ToList();
            if (group.Count > best.Count) best = group;
        }

        return best;
    }
}
