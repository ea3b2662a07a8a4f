using OrderUnfold.Analysis;
using OrderUnfold.Instruments;

namespace OrderUnfold.Planning;

/// <summary>
/// Chooses cavity lengths so that a set of scanning cavities tells every frequency shift up to the span
/// apart from zero by at least the required alias margin, for every length within the parts' tolerance.
/// </summary>
/// <remarks>
/// A design is judged by its worst alias: the smallest margin over shifts from
/// <see cref="PlanSettings.MinimumShiftHz"/> to the span, leaving out the rising flank of the central peak (the
/// line itself; <see cref="AliasMargin.LowestAlias(IReadOnlyList{Instrument}, double, double)"/>, exact at the
/// nominal lengths). The tolerance is handled by sampling
/// each toleranced length across its band, densely enough that the alias positions move by at most
/// <see cref="PlanSettings.ToleranceResolutionLinewidths"/> between neighbouring samples, and taking the worst
/// over all combinations. Designs are ranked by that worst margin (largest first), then by the total length of
/// the planned cavities (shortest first).
/// </remarks>
public static class Planner
{
    /// <summary>Evaluates one design (reference cavity first).</summary>
    public static DesignEvaluation Evaluate(IReadOnlyList<DesignCavity> cavities, PlanSettings settings)
    {
        settings.Validate();
        if (cavities.Count < 2) throw new InputException($"a design needs at least two cavities but got {cavities.Count}");
        foreach (var c in cavities) c.Validate();
        return EvaluateCore(cavities, settings, new List<double>());
    }

    /// <summary>
    /// Tries each candidate length as one more cavity next to <paramref name="fixedCavities"/> and returns every
    /// design, ranked (best first). A cancelled <paramref name="cancellationToken"/> stops the search before its next
    /// candidate (<see cref="OperationCanceledException"/>).
    /// </summary>
    public static IReadOnlyList<DesignEvaluation> RankAddedCavity(IReadOnlyList<DesignCavity> fixedCavities, IReadOnlyList<CandidateLength> candidates,
        CavityFamily family, PlanSettings settings, string name = "candidate", CancellationToken cancellationToken = default)
    {
        settings.Validate();
        if (fixedCavities.Count == 0) throw new InputException("the plan needs at least one existing cavity");
        if (candidates.Count == 0) throw new InputException("no candidate lengths to try");
        foreach (var c in fixedCavities) c.Validate();
        var buffer = new List<double>();
        var results = new List<DesignEvaluation>(candidates.Count);
        foreach (var cand in candidates)
        {
            cancellationToken.ThrowIfCancellationRequested();
            var cav = family.Make(name, cand);
            cav.Validate();
            results.Add(EvaluateCore([.. fixedCavities, cav], settings, buffer));
        }

        return Rank(results);
    }

    /// <summary>
    /// Three-cavity designs: each of <paramref name="pairs"/> (two-cavity designs, e.g. the best few of
    /// <see cref="RankAddedCavity"/>) extended by each candidate length. Returns the best <paramref name="keep"/>,
    /// ranked. Candidates are evaluated in order of their nominal margin and the search stops once no remaining
    /// candidate can enter the kept list (the worst margin within tolerance never exceeds the nominal one), so
    /// the result is the same as evaluating all. A cancelled <paramref name="cancellationToken"/> stops the search
    /// (<see cref="OperationCanceledException"/>).
    /// </summary>
    public static IReadOnlyList<DesignEvaluation> RankThirdCavity(IReadOnlyList<DesignEvaluation> pairs, IReadOnlyList<CandidateLength> candidates,
        CavityFamily family, PlanSettings settings, int keep = 10, string name = "third", CancellationToken cancellationToken = default)
    {
        settings.Validate();
        if (candidates.Count == 0) throw new InputException("no candidate lengths to try");
        if (keep < 1) throw new ArgumentOutOfRangeException(nameof(keep), keep, "keep at least one design");
        var buffer = new List<double>();
        var nominal = new List<(IReadOnlyList<DesignCavity> Cavities, double Margin, double Length)>();
        foreach (var pair in pairs)
        {
            cancellationToken.ThrowIfCancellationRequested();
            foreach (var cand in candidates)
            {
                if (pair.Added.Any(a => a.Instrument.LengthM is double l && Math.Abs(l - cand.LengthM) <= 1e-12 * l)) continue;
                var cav = family.Make(name, cand);
                cav.Validate();
                IReadOnlyList<DesignCavity> cavities = [.. pair.Cavities, cav];
                var (from, to) = Range(cavities.Select(c => c.Instrument).ToList(), settings);
                var m = AliasMargin.LowestAlias(cavities.Select(c => c.Instrument).ToList(), from, to, buffer).MarginLinewidths;
                nominal.Add((cavities, m, AddedLength(cavities)));
            }
        }

        var kept = new List<DesignEvaluation>();
        foreach (var item in nominal.OrderByDescending(n => Rounded(n.Margin)).ThenBy(n => n.Length))
        {
            cancellationToken.ThrowIfCancellationRequested();
            if (kept.Count >= keep)
            {
                var worstKept = Rounded(kept[^1].Robust.MarginLinewidths);
                if (Rounded(item.Margin) < worstKept) break;
            }

            var ev = EvaluateCore(item.Cavities, settings, buffer);
            kept.Add(ev);
            kept = Rank(kept).Take(keep).ToList();
        }

        return kept;
    }

    /// <summary>Orders designs: largest worst margin within tolerance first (margins equal to 1e-6 linewidths
    /// count as ties), then the shorter total length of the planned cavities.</summary>
    public static List<DesignEvaluation> Rank(IEnumerable<DesignEvaluation> designs) =>
        designs.OrderByDescending(d => Rounded(d.Robust.MarginLinewidths)).ThenBy(d => AddedLength(d.Cavities)).ToList();

    /// <summary>The searched shift range [minimum shift, span] for a set of instruments.</summary>
    public static (double FromHz, double ToHz) Range(IReadOnlyList<Instrument> instruments, PlanSettings settings)
    {
        var from = settings.MinimumShiftHz ?? AliasMargin.DefaultMinimumShiftHz(instruments, settings.ThresholdLinewidths);
        if (!(from < settings.SpanHz))
            throw new InputException($"the span ({Units.Quantity.FormatFrequency(settings.SpanHz)}) must exceed the smallest shift counted as an alias ({Units.Quantity.FormatFrequency(from)}, {settings.ThresholdLinewidths * 2:G3} linewidths)");
        return (from, settings.SpanHz);
    }

    private static double Rounded(double margin) => double.IsFinite(margin) ? Math.Round(margin, 6) : margin;

    private static double AddedLength(IReadOnlyList<DesignCavity> cavities) =>
        cavities.Skip(1).Sum(c => c.Instrument.LengthM ?? 0);

    private static DesignEvaluation EvaluateCore(IReadOnlyList<DesignCavity> cavities, PlanSettings settings, List<double> buffer)
    {
        var nominalSet = cavities.Select(c => c.Instrument).ToList();
        var (from, to) = Range(nominalSet, settings);
        var nominal = AliasMargin.LowestAlias(nominalSet, from, to, buffer);
        var (samples, bound) = ToleranceSamples(cavities, settings, to);
        var (robust, robustSet) = samples.Any(s => s > 1)
            ? WorstWithinTolerance(cavities, samples, nominal, nominalSet, from, to, buffer)
            : (nominal, nominalSet);

        var firstAlias = AliasMargin.FirstBelow(nominalSet, settings.ThresholdLinewidths, from, to);
        var f1 = nominalSet[0].FsrHz;
        var limit = settings.RepeatSearchLimit > 0 ? settings.RepeatSearchLimit : Math.Max(1000, (long)Math.Ceiling(20 * to / f1));
        var tolerances = cavities.Select(c => Math.Max(c.RelativeTolerance, 1e-9)).ToList();
        var repeat = AliasMargin.FindRepeat(nominalSet, tolerances, limit);
        // a margin this small is an exact alias up to rounding: no SNR tells it apart
        var snr = robust.MarginLinewidths < 1e-6
            ? double.PositiveInfinity
            : AliasSnr.RequiredPeakSnr(robustSet, robust.DeltaHz, settings.Sampling, settings.RequiredDeltaChiSquare);

        DesignVerdict verdict;
        if (repeat is not null && repeat.RepeatHz <= to) verdict = DesignVerdict.RepeatsWithinSpan;
        else if (nominal.MarginLinewidths < settings.ThresholdLinewidths) verdict = DesignVerdict.Aliased;
        else if (robust.MarginLinewidths < settings.ThresholdLinewidths) verdict = DesignVerdict.FailsWithinTolerance;
        else verdict = DesignVerdict.Ok;

        return new DesignEvaluation
        {
            Cavities = cavities,
            MinimumShiftHz = from,
            SpanHz = to,
            ThresholdLinewidths = settings.ThresholdLinewidths,
            Nominal = nominal,
            Robust = robust,
            RobustLengthsM = robustSet.Select(i => i.LengthM).ToList(),
            ToleranceSamples = samples,
            SamplingErrorBoundLinewidths = bound,
            FirstAliasHz = firstAlias,
            Repeat = repeat,
            RepeatSearchLimitHz = limit * f1,
            RequiredPeakSnr = snr,
            Verdict = verdict,
        };
    }

    /// <summary>
    /// Tolerance bands: P_k lengths per toleranced cavity, spaced so a length anywhere in the band is within ε_k/(P_k − 1)
    /// (relative) of a sample; a relative FSR change δ moves misfit_k by at most span·δ/linewidth_k. Returns P_k per cavity
    /// (1 for an exact one) and that bound, linewidths.
    /// </summary>
    private static (int[] Samples, double Bound) ToleranceSamples(IReadOnlyList<DesignCavity> cavities, PlanSettings settings, double to)
    {
        var samples = new int[cavities.Count];
        var bound = 0.0;
        for (var k = 0; k < cavities.Count; k++)
        {
            var eps = cavities[k].RelativeTolerance;
            if (eps <= 0)
            {
                samples[k] = 1;
                continue;
            }

            var lw = cavities[k].Instrument.LinewidthHz;
            var need = 1 + (int)Math.Min(int.MaxValue - 2, Math.Ceiling(to * eps / (settings.ToleranceResolutionLinewidths * lw)));
            samples[k] = Math.Clamp(need, 3, settings.MaxToleranceSamples);
            bound = Math.Max(bound, to * eps / ((samples[k] - 1) * lw));
        }

        return (samples, bound);
    }

    /// <summary>The lowest alias margin over every combination of sampled lengths (the grid of tolerance samples), and the
    /// cavities that give it; the nominal design when no combination is worse.</summary>
    private static (MarginPoint Robust, List<Instrument> RobustSet) WorstWithinTolerance(IReadOnlyList<DesignCavity> cavities, int[] samples,
        MarginPoint nominal, List<Instrument> nominalSet, double from, double to, List<double> buffer)
    {
        var robust = nominal;
        var robustSet = nominalSet;
        var current = nominalSet.ToArray();
        void Visit(int k)
        {
            if (k == cavities.Count)
            {
                var m = AliasMargin.LowestAlias(current, from, to, buffer);
                if (m.MarginLinewidths < robust.MarginLinewidths)
                {
                    robust = m;
                    robustSet = current.ToList();
                }

                return;
            }

            if (samples[k] == 1)
            {
                current[k] = cavities[k].Instrument;
                Visit(k + 1);
                return;
            }

            var eps = cavities[k].RelativeTolerance;
            for (var j = 0; j < samples[k]; j++)
            {
                var t = -eps + 2 * eps * j / (samples[k] - 1);
                current[k] = cavities[k].AtRelativeLength(t);
                Visit(k + 1);
            }
        }

        Visit(0);
        return (robust, robustSet);
    }
}
