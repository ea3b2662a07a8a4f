namespace OrderUnfold.Analysis.Modes;

/// <summary>
/// The reading of folded positions (one cavity, orders unknown): the comb's folded step δ is the mode spacing only
/// modulo the FSR, so every spacing (m·FSR ± δ)/j is listed as a candidate; one is chosen only when a stated spacing
/// range leaves one, or when all modes lie within one FSR; otherwise the reading says how a second cavity settles it.
/// </summary>
internal static class FoldedSpacingReader
{
    /// <summary>Most candidates listed; more are cut with a note.</summary>
    private const int MaxCandidates = 200;

    /// <summary>Reads the folded comb <paramref name="comb"/> seen by a cavity of FSR <paramref name="fsr"/>.</summary>
    public static FoldedReading Read(CombFit comb, double fsr, EnvelopeFit envelope, ModeAnalysisOptions o, List<string> notes)
    {
        var delta = comb.StepHz;
        var slotSpan = comb.LastK - comb.FirstK;
        var withinOne = slotSpan >= 1 && slotSpan * delta < fsr;
        var ranged = o.SpacingMinHz is not null || o.SpacingMaxHz is not null;

        var list = Candidates(comb, fsr, envelope, o, ranged, out var truncated);
        var primary = list.Where(c => c.Divisor == 1).OrderBy(c => c.SpacingHz).ToList();
        var extra = list.Where(c => c.Divisor > 1).OrderBy(c => c.SpacingHz).ToList();
        if (!ranged) primary = primary.Take(o.FoldedCandidatesListed).ToList();
        var candidates = primary.Concat(extra).OrderBy(c => c.SpacingHz).ToList();
        if (truncated) notes.Add($"More than {MaxCandidates} spacing candidates: only the first {MaxCandidates} are listed; narrow the spacing range.");

        var (chosen, reason) = ranged ? ChooseInRange(primary, o) : ChooseWithoutRange(primary, fsr, delta, withinOne, slotSpan);
        var F = Quantity.FormatFrequency(fsr);
        var ambiguity =
            $"One cavity sees a line only modulo its FSR ({F}), so it shows the mode spacing only modulo the FSR: δ = {Quantity.FormatFrequency(delta)}. " +
            "Every spacing m·FSR + δ or m·FSR − δ folds the modes onto the same positions (the minus sign with the mode order " +
            "reversed), and so does (m·FSR ± δ)/j if only every j-th mode were above the detection limit.";

        var (suggested, separation) = SuggestSecondFsr(primary, fsr);
        var second =
            $"A second cavity whose FSR is not a ratio of small whole numbers times {F} settles it: candidates that differ by " +
            "n·FSR put the neighbouring modes n·FSR apart, which a second cavity of FSR F2 sees as n·FSR modulo F2, a visible " +
            "shift unless n·FSR is close to a multiple of F2. Unfold both sweeps together and the orders are resolved.";
        if (suggested is { } f2s && separation is { } sp)
            second += $" For the candidates listed, an FSR of {Quantity.FormatFrequency(f2s)} would keep their neighbouring modes at least " +
                      $"{Quantity.FormatFrequency(sp)} apart; that must be several of its linewidths.";

        return new FoldedReading(fsr, delta, comb.StepSigmaHz, withinOne, candidates, chosen, reason, ambiguity, second, suggested, separation);
    }

    /// <summary>Every spacing (m·FSR ± δ)/j for j up to <see cref="ModeAnalysisOptions.FoldedMaxDivisor"/>: with a range,
    /// the multiples m that can reach it; without one, the first few. At most <see cref="MaxCandidates"/>.</summary>
    private static List<SpacingCandidate> Candidates(CombFit comb, double fsr, EnvelopeFit envelope, ModeAnalysisOptions o, bool ranged, out bool truncated)
    {
        var delta = comb.StepHz;
        var lo = o.SpacingMinHz ?? 0;
        var hi = o.SpacingMaxHz ?? double.PositiveInfinity;
        var list = new List<SpacingCandidate>();
        truncated = false;
        for (var j = 1; j <= o.FoldedMaxDivisor; j++)
        {
            int mFrom, mTo;
            if (ranged)
            {
                mFrom = Math.Max(0, (int)Math.Floor((j * lo - delta) / fsr));
                mTo = double.IsFinite(hi)
                    ? (int)Math.Ceiling((j * hi + delta) / fsr)
                    : mFrom + (j == 1 ? o.FoldedCandidatesListed : 1);
            }
            else
            {
                mFrom = 0;
                mTo = j == 1 ? o.FoldedCandidatesListed / 2 + 1 : 1;
            }

            for (var m = mFrom; m <= mTo; m++)
            {
                foreach (var sign in new[] { 1, -1 })
                {
                    var spacing = (m * fsr + sign * delta) / j;
                    if (!(spacing > 0)) continue;
                    var inRange = spacing >= lo && spacing <= hi;
                    if (ranged && !inRange) continue;
                    if (list.Any(c => c.Divisor == j && Math.Abs(c.SpacingHz - spacing) < 1e-9 * spacing)) continue;
                    if (list.Count >= MaxCandidates)
                    {
                        truncated = true;
                        continue;
                    }

                    var optical = PhysicalConstants.SpeedOfLight / (2 * spacing);
                    list.Add(new SpacingCandidate(spacing, comb.StepSigmaHz / j, m, sign, j, optical,
                        o.GroupIndex is { } n ? optical / n : null,
                        envelope.Fitted ? envelope.FwhmModes!.Value * spacing * j : null, inRange));
                }
            }
        }

        return list;
    }

    /// <summary>With a stated spacing range: the only candidate (j = 1) inside it, or none with the reason.</summary>
    private static (SpacingCandidate? Chosen, string Reason) ChooseInRange(List<SpacingCandidate> primary, ModeAnalysisOptions o)
    {
        var inRange = primary.Where(c => c.InRange).ToList();
        var range = $"{(o.SpacingMinHz is { } a ? Quantity.FormatFrequency(a) : "0")} … {(o.SpacingMaxHz is { } b ? Quantity.FormatFrequency(b) : "∞")}";
        if (inRange.Count == 1)
        {
            var chosen = inRange[0];
            return (chosen, $"Δ = {Quantity.FormatFrequency(chosen.SpacingHz)} is the only candidate in the stated range {range} " +
                            "(taking neighbouring lines as neighbouring modes).");
        }

        return inRange.Count == 0
            ? (null, $"No candidate lies in the stated range {range}: check the range and the FSR.")
            : (null, $"{inRange.Count} candidates lie in the stated range {range}; one cavity cannot choose between them.");
    }

    /// <summary>Without a range: δ itself when three or more modes lie within one FSR, else none with the reason.</summary>
    private static (SpacingCandidate? Chosen, string Reason) ChooseWithoutRange(List<SpacingCandidate> primary, double fsr, double delta, bool withinOne, int slotSpan)
    {
        var F = Quantity.FormatFrequency(fsr);
        var d = Quantity.FormatFrequency(delta);
        if (withinOne && slotSpan >= 2)
        {
            return (primary.First(c => c.FsrMultiple == 0 && c.Sign == 1),
                $"Read with spacing δ = {d}, all modes lie within one FSR ({F}); every other candidate would spread them over " +
                "more than one FSR. If the laser's whole spectrum is known to be narrower than the FSR (one cavity cannot check " +
                "this), the spacing is δ.");
        }

        if (withinOne)
            return (null, $"Two modes within one FSR can be δ = {d} or FSR − δ = {Quantity.FormatFrequency(fsr - delta)} apart; one cavity cannot tell which.");
        return (null, $"The modes spread over more than one FSR ({F}), so the spacing is ambiguous; state a spacing range " +
                      "(--spacing-min/--spacing-max) if the laser's design bounds it.");
    }

    /// <summary>
    /// Under candidate (m, sign) the next mode sits at δ + sign·m·FSR from the first: in a second cavity of FSR F2 two
    /// candidates differ there by (n_a − n_b)·FSR modulo F2. Returns the F2 (0.6…1.4 FSR, not within 2 % of it) that
    /// maximises the smallest such distance, and that distance; nulls with fewer than two distinct candidates.
    /// </summary>
    private static (double? SuggestedFsr, double? Separation) SuggestSecondFsr(List<SpacingCandidate> primary, double fsr)
    {
        var distinct = primary.Select(c => c.Sign * c.FsrMultiple).Distinct().ToList();
        if (distinct.Count < 2) return (null, null);
        var diffs = new HashSet<int>();
        foreach (var p in distinct)
            foreach (var q in distinct)
                if (p > q) diffs.Add(p - q);
        double bestF2 = double.NaN, bestSep = -1;
        const int Steps = 4000;
        for (var s = 0; s <= Steps; s++)
        {
            var f2 = fsr * (0.6 + 0.8 * s / Steps);
            if (Math.Abs(f2 - fsr) < 0.02 * fsr) continue;
            var sep = diffs.Min(n => Math.Abs(FoldArithmetic.WrapTo(n * fsr, f2)));
            if (sep > bestSep)
            {
                bestSep = sep;
                bestF2 = f2;
            }
        }

        return (bestF2, bestSep);
    }
}
