using OrderUnfold.Analysis;
using OrderUnfold.Inversion;
using OrderUnfold.Units;

namespace OrderUnfold.Pipeline;

/// <summary>What the fewest-lines selection proposed and whether it was kept.</summary>
/// <param name="GridLines">Lines of the grid solution it started from.</param>
/// <param name="Proposed">Lines of the fewest-lines explanation.</param>
/// <param name="GridReducedChiSquare">Reduced χ² of the grid solution.</param>
/// <param name="ProposedReducedChiSquare">Reduced χ² of the refined fewest-lines explanation (NaN when it was not refined).</param>
/// <param name="Kept">True when the fewest-lines explanation replaced the grid solution.</param>
/// <param name="Reason">Why it was kept or not.</param>
public sealed record FewestLinesFinding(int GridLines, int Proposed, double GridReducedChiSquare, double ProposedReducedChiSquare, bool Kept, string Reason);

/// <summary>
/// The explanation with the fewest lines for two cavities whose grid solution is a mixture.
/// <para>
/// With two cavities each folded peak i of the first and each folded peak j of the second define one candidate frequency
/// ν_ij (the frequency that folds onto both). Any nonnegative matrix x_ij whose row and column sums are the folded
/// intensities fits the sweeps equally well (a transportation polytope), and its L1 weight Σx is the same for all of
/// them; so the grid's L1-weighted NNLS cannot prefer the true explanation to one with many more lines, and on a wide
/// window it returns such a mixture (and the sweep gains and offsets settle on it). A reweighted L1 does not help:
/// every vertex of the polytope is a local minimum of the concave penalty it approximates.
/// </para>
/// <para>
/// This stage therefore works on the folded spectra themselves, which the data fix: each cavity's sweep is unfolded alone
/// within one FSR (its folded lines, intensities relative to their sum, free of the gain ratio), the folded lines are
/// paired greedily, largest shared intensity first, among the pairs whose candidate frequency exists (the two folded
/// positions agree within <see cref="PairToleranceLinewidths"/> of the wider linewidth within ± the widened window's half
/// width of the strongest pair), and a leftover intensity becomes a further pair only when it is a clear part of its
/// folded line (<see cref="LeftoverFraction"/>). The result has at most n₁ + n₂ − 1 lines, fewer when intensities match.
/// It is refined against the raw sweeps (frequencies, intensities, offsets, gains, backgrounds, and the order check that
/// tries every near-alias); it replaces the grid solution only when it fits at least as well
/// (reduced χ² not above the grid's): the data cannot then tell it from the mixture, and the issue's rule prefers the
/// explanation with fewer lines.
/// </para>
/// </summary>
public static class FewestLines
{
    /// <summary>Two folded positions pair when their candidate frequency folds onto both within this many (wider) linewidths.</summary>
    public const double PairToleranceLinewidths = 0.5;

    /// <summary>A leftover of a folded line's intensity after pairing becomes a further line only above this fraction of
    /// the folded line (intensities of one line measured in two cavities agree to a few per cent).</summary>
    public const double LeftoverFraction = 0.10;

    /// <summary>More folded lines per cavity than this and the pairing is not attempted (a broadband source).</summary>
    public const int MaxFoldedLines = 40;

    /// <summary>Whether the evidence calls for the stage: two distinct cavities, a widened window, and far more grid lines
    /// than either cavity shows folded peaks.</summary>
    public static bool Applies(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, WindowFinding? window) =>
        window is { StillWider: false } && TwoCavities(sweeps, grid) && grid.Lines.Count > 8;

    /// <summary>
    /// Whether the stage is tried on a window that was not widened: two distinct cavities and a grid of more lines than a
    /// line fit checks (<see cref="UnfoldPipeline.MaxUnrefinedLines"/>). At tens of thousands of samples per record and a
    /// signal-to-noise ratio of a few hundred, the grid's small misfit of a line between two bins (two Airy peaks a quarter
    /// linewidth apart instead of one) lies far above the noise, and the grid explains it with small bins at alias
    /// positions: the demo recorded with 50 000–80 000 samples per record (simulated) gave 63–181 grid lines, the six true
    /// ones among them, and the line fit of them all ran out of its budget. The fewest-lines explanation replaces the grid
    /// only when it fits at least as well.
    /// </summary>
    public static bool AppliesToCrowdedGrid(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, WindowFinding? window) =>
        window is null && TwoCavities(sweeps, grid) && grid.Lines.Count > UnfoldPipeline.MaxUnrefinedLines;

    private static bool TwoCavities(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid) =>
        grid.OrdersResolved && sweeps.Select(s => s.Instrument.FsrHz).Distinct().Count() == 2;

    /// <summary>Proposes the fewest-lines explanation, refines it and keeps it when it fits at least as well as the grid.</summary>
    public static (UnfoldResult Result, RefinementDiagnostics? Refinement, FewestLinesFinding Finding) Run(
        IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, UnfoldOptions options, double halfWidthHz, RefineOptions refineOptions,
        IProgress<string>? progress, CancellationToken cancellationToken = default, bool widened = true)
    {
        progress?.Report($"fewest lines: the grid solution has {grid.Lines.Count} lines; pairing the cavities' folded lines");
        var proposed = Propose(sweeps, grid, options, halfWidthHz, progress, cancellationToken);
        if (proposed is null)
            return (grid, null, new FewestLinesFinding(grid.Lines.Count, 0, grid.ReducedChiSquare, double.NaN, false, "the folded lines could not be paired"));
        progress?.Report($"fewest lines: {proposed.Lines.Count} line(s) proposed; refining them against the raw sweeps");
        var (refined, diag) = LineRefiner.Refine(sweeps, proposed, refineOptions, progress, cancellationToken);
        var chi = refined.ReducedChiSquare;
        if (diag.BudgetExhausted is not null || !(chi <= grid.ReducedChiSquare))
            return (grid, null, new FewestLinesFinding(grid.Lines.Count, proposed.Lines.Count, grid.ReducedChiSquare, chi, false,
                diag.BudgetExhausted is not null ? $"its refinement ran out of its budget ({diag.BudgetExhausted})" : $"it fits worse (reduced χ² {chi:F3} against {grid.ReducedChiSquare:F3})"));
        var reason = $"{refined.Lines.Count} line(s) fit the sweeps as well as the grid's {grid.Lines.Count} (reduced χ² {chi:F3} against {grid.ReducedChiSquare:F3}): the explanation with fewer lines is kept";
        var warnings = refined.Warnings.ToList();
        warnings.Add((widened
                         ? $"the grid solution on the widened window was a mixture of {grid.Lines.Count} lines that two cavities cannot tell from fewer; "
                         : $"the grid solution held {grid.Lines.Count} lines, more than a line fit checks ({UnfoldPipeline.MaxUnrefinedLines}); ") +
                     $"pairing the folded lines of the two cavities gave {proposed.Lines.Count}, and {reason}; the spectrum output shows these lines, not the grid's");
        return (refined with { Warnings = warnings }, diag, new FewestLinesFinding(grid.Lines.Count, proposed.Lines.Count, grid.ReducedChiSquare, chi, true, reason));
    }

    private sealed record Folded(double PositionHz, double Weight, double Sigma);

    /// <summary>The paired lines as a grid-like result (frequencies relative to the strongest pair, sweep offsets in the same
    /// frame, the grid's gains and backgrounds), or null when nothing pairs.</summary>
    internal static UnfoldResult? Propose(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, UnfoldOptions options, double halfWidthHz,
        IProgress<string>? progress, CancellationToken cancellationToken = default)
    {
        var fsrs = sweeps.Select(s => s.Instrument.FsrHz).Distinct().ToArray();
        if (fsrs.Length != 2) return null;
        var first = Enumerable.Range(0, sweeps.Count).First(k => sweeps[k].Instrument.FsrHz == fsrs[0]);
        var second = Enumerable.Range(0, sweeps.Count).First(k => sweeps[k].Instrument.FsrHz == fsrs[1]);
        var a = FoldedLines(sweeps[first], grid.Sweeps[first].OffsetHz, options, progress, cancellationToken);
        var b = FoldedLines(sweeps[second], grid.Sweeps[second].OffsetHz, options, progress, cancellationToken);
        if (a.Count == 0 || b.Count == 0 || a.Count > MaxFoldedLines || b.Count > MaxFoldedLines) return null;
        var tol = PairToleranceLinewidths * sweeps.Max(s => s.Instrument.LinewidthHz);
        var (pairs, centre) = PairGreedily(a, b, fsrs[0], fsrs[1], tol, halfWidthHz, options.MinSnr);
        if (pairs.Count == 0 || centre is not double anchor) return null;
        return AsResult(grid, pairs, a, b, anchor, halfWidthHz);
    }

    /// <summary>
    /// Pairs the folded lines of the two cavities greedily, the largest shared amount first: a pair takes a clear share of
    /// both folded lines, lies within <paramref name="tol"/> of folding onto both, and its frequency is the candidate
    /// nearest the first pair's (the frame). Also returns that first frequency (null when nothing pairs).
    /// </summary>
    private static (List<(int I, int J, double Nu, double Amount)> Pairs, double? Centre) PairGreedily(List<Folded> a, List<Folded> b, double f1, double f2,
        double tol, double halfWidthHz, double minSnr)
    {
        var ra = a.Select(x => x.Weight).ToArray();
        var rb = b.Select(x => x.Weight).ToArray();
        // the strongest pair sets the frame: its candidate nearest the grid's anchor (any representative would do)
        // the first pair's frequency is only needed modulo the instruments' common (near-)period: any representative within a
        // few window widths that folds onto both will do
        var firstRange = 4 * halfWidthHz;
        var pairs = new List<(int I, int J, double Nu, double Amount)>();
        double? centre = null;
        while (true)
        {
            (int I, int J, double Nu, double Amount, double Miss)? pick = null;
            for (var i = 0; i < a.Count; i++)
            for (var j = 0; j < b.Count; j++)
            {
                var amount = Math.Min(ra[i], rb[j]);
                if (!(amount > 0)) continue;
                // a pair takes a clear share of both folded lines (or the rest of one of them, when that rest is clear)
                if (amount < LeftoverFraction * a[i].Weight || amount < LeftoverFraction * b[j].Weight) continue;
                if (amount < minSnr * Math.Max(a[i].Sigma, b[j].Sigma)) continue;
                var (nu, miss) = centre is double c ? Candidate(a[i].PositionHz, b[j].PositionHz, c, halfWidthHz, f1, f2) : Candidate(a[i].PositionHz, b[j].PositionHz, 0, firstRange, f1, f2);
                if (!(miss <= tol)) continue;
                if (pick is null || amount > pick.Value.Amount + 1e-12 || (Math.Abs(amount - pick.Value.Amount) <= 1e-12 && miss < pick.Value.Miss))
                    pick = (i, j, nu, amount, miss);
            }

            if (pick is not { } p) break;
            centre ??= p.Nu;
            pairs.Add((p.I, p.J, p.Nu, p.Amount));
            ra[p.I] -= p.Amount;
            rb[p.J] -= p.Amount;
            if (pairs.Count > a.Count + b.Count) break;
        }

        return (pairs, centre);
    }

    /// <summary>The frequency ν ≡ <paramref name="pa"/> (mod f1) nearest to <paramref name="centre"/> within ±<paramref name="half"/>
    /// that folds onto <paramref name="pb"/> (mod f2) best, and its mismatch.</summary>
    private static (double Nu, double Miss) Candidate(double pa, double pb, double centre, double half, double f1, double f2)
    {
        var best = (Nu: double.NaN, Miss: double.PositiveInfinity);
        var n0 = Math.Ceiling((centre - half - pa) / f1);
        for (var n = n0; pa + n * f1 <= centre + half; n++)
        {
            var nu = pa + n * f1;
            var miss = Math.Abs(Wrap(nu - pb, f2));
            if (miss < best.Miss - 1e-9 * f2 || (Math.Abs(miss - best.Miss) <= 1e-9 * f2 && Math.Abs(nu - centre) < Math.Abs(best.Nu - centre))) best = (nu, miss);
        }

        return best;
    }

    /// <summary>The paired lines as a grid-like result in the frame of <paramref name="anchor"/>.</summary>
    private static UnfoldResult AsResult(UnfoldResult grid, List<(int I, int J, double Nu, double Amount)> pairs, List<Folded> a, List<Folded> b, double anchor, double halfWidthHz)
    {
        // the folded intensities are relative to their sums; the grid's raw intensity scale comes from its strongest line
        var rawScale = grid.Lines.Count > 0 ? grid.Lines.Max(l => l.RawIntensity) : 1;
        var top = pairs.Max(q => q.Amount);
        var step = grid.Grid.StepHz;
        var count = (int)Math.Ceiling(2 * halfWidthHz / step) + 1;
        var newGrid = new FrequencyGrid(-halfWidthHz, step, count);
        var spectrum = new double[count];
        var lines = new List<UnfoldedLine>();
        foreach (var q in pairs.OrderBy(q => q.Nu))
        {
            var f = q.Nu - anchor;
            var bin = Math.Clamp((int)Math.Round((f - newGrid.StartHz) / step), 0, count - 1);
            var snr = q.Amount / Math.Max(a[q.I].Sigma, b[q.J].Sigma);
            lines.Add(new UnfoldedLine(f, q.Amount / top, rawScale * q.Amount / top, snr, bin, bin));
            spectrum[bin] += q.Amount / top;
        }

        var fits = grid.Sweeps.Select(s => s with { OffsetHz = s.OffsetHz - anchor }).ToList();
        return grid with
        {
            Grid = newGrid,
            Spectrum = spectrum,
            Lines = lines,
            Sweeps = fits,
            OffsetTrials = grid.OffsetTrials.Select(t => t with { OffsetHz = t.OffsetHz - anchor }).ToList(),
        };
    }

    /// <summary>A sweep's folded lines: the sweep unfolded alone within one FSR, positions in the joint frame (the grid's
    /// offset <paramref name="jointOffsetHz"/> of this sweep), intensities relative to their sum.</summary>
    private static List<Folded> FoldedLines(CalibratedSweep sweep, double jointOffsetHz, UnfoldOptions options, IProgress<string>? progress,
        CancellationToken cancellationToken)
    {
        UnfoldResult alone;
        try
        {
            alone = Unfolder.Run([sweep], options with { WindowStartHz = null, WindowEndHz = null }, cancellationToken: cancellationToken);
        }
        catch (InputException e)
        {
            // a sweep that cannot be unfolded alone gives no folded lines: the stage then proposes nothing
            progress?.Report($"fewest lines: {sweep.Name} could not be unfolded alone ({e.Message})");
            return [];
        }

        var phi = alone.Sweeps[0].OffsetHz;
        var sum = alone.Lines.Sum(l => l.Intensity);
        if (!(sum > 0)) return [];
        var list = alone.Lines.Select(l => new Folded(Wrap(l.FrequencyHz - phi + jointOffsetHz, sweep.Instrument.FsrHz), l.Intensity / sum, l.IntensitySigma / sum))
            .OrderByDescending(x => x.Weight).ToList();
        progress?.Report($"fewest lines: {sweep.Name}: {list.Count} folded line(s), intensities {string.Join(" ", list.Take(12).Select(x => x.Weight.ToString("F3")))}");
        return list;
    }

    /// <summary>x reduced to (−p/2, p/2].</summary>
    private static double Wrap(double x, double p)
    {
        var r = x - p * Math.Round(x / p);
        return r <= -p / 2 ? r + p : r;
    }
}
