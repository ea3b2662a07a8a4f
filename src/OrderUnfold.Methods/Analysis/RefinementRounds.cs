using OrderUnfold.Inversion;

namespace OrderUnfold.Analysis;

/// <summary>What every stage of one refinement shares.</summary>
/// <param name="Sweeps">The sweeps, in the order of the grid result's sweep fits.</param>
/// <param name="Grid">The grid result being refined.</param>
/// <param name="Options">The refinement's options.</param>
/// <param name="Samples">The sweeps' samples, concatenated.</param>
/// <param name="Threshold">Δχ² a line must add to be kept (<see cref="LineRefiner.Threshold"/>).</param>
/// <param name="Warnings">The result's warnings, the grid's first; stages add theirs.</param>
/// <param name="Budget">The refinement's iteration and CPU budget.</param>
internal sealed record RefinementContext(IReadOnlyList<CalibratedSweep> Sweeps, UnfoldResult Grid, RefineOptions Options, SweepSamples Samples,
    double Threshold, List<string> Warnings, WorkBudget Budget)
{
    /// <summary>Linewidth of the narrowest instrument.</summary>
    public double NarrowestLinewidthHz => Sweeps.Min(s => s.Instrument.LinewidthHz);

    /// <summary>Linewidth of the widest instrument.</summary>
    public double WidestLinewidthHz => Sweeps.Max(s => s.Instrument.LinewidthHz);
}

/// <summary>Where the fit rounds ended.</summary>
/// <param name="Layout">The parameter layout of the lines still in the fit.</param>
/// <param name="Fit">The last fit (null when the last round changed the line set or no round ran).</param>
/// <param name="Tracked">The lines still in the fit, in layout order.</param>
/// <param name="Failure">Why the refinement failed as a whole; null when it settled.</param>
/// <param name="Dropped">Lines dropped as not significant.</param>
/// <param name="Merged">Pairs merged.</param>
/// <param name="Pinned">Lines pinned at their grid position.</param>
internal sealed record RoundsOutcome(ParameterLayout Layout, LineFitResult? Fit, List<TrackedLine> Tracked, string? Failure, int Dropped, int Merged,
    int Pinned);

/// <summary>
/// The refinement's fit rounds: fit, then pin wanderers, merge collapsed pairs and prune insignificant lines
/// (<see cref="LineSetEdits"/>), and fit again until a round changes nothing, within a round limit and the work budget.
/// </summary>
internal static class RefinementRounds
{
    /// <summary>A fit may end this much above the χ² it started from (relative) and still count as not having raised it:
    /// the rounding of a sum over 10⁴–10⁶ samples, not a real rise. Chosen, not measured.</summary>
    private const double ChiSquareRiseRelative = 1e-6;

    /// <summary>The absolute part of the same allowance (for a χ² near 0).</summary>
    private const double ChiSquareRiseAbsolute = 1e-9;

    /// <summary>Round limit per grid line: a line can be pinned once and removed (dropped or merged) once, each a round of
    /// its group at worst; four per line plus <see cref="SpareRounds"/> leaves margin. Chosen bound.</summary>
    private const int RoundsPerLine = 4;

    /// <summary>Rounds allowed besides <see cref="RoundsPerLine"/> per line.</summary>
    private const int SpareRounds = 8;

    /// <summary>Runs the rounds on <paramref name="context"/>'s grid lines (at least one).</summary>
    public static RoundsOutcome Run(RefinementContext context)
    {
        var (grid, options, samples, budget) = (context.Grid, context.Options, context.Samples, context.Budget);
        var layout = new ParameterLayout(grid.Lines.Count, context.Sweeps.Count, options.FitWidths);
        var p = layout.Initial(grid.Lines, grid.Sweeps, context.NarrowestLinewidthHz);
        var tracked = Track(context, layout, p);
        var mergeHz = options.MergeLinewidths * context.NarrowestLinewidthHz;
        LineFitResult? fit = null;
        string? failure = null;
        int dropped = 0, merged = 0, pinned = 0;
        var maxRounds = RoundsPerLine * grid.Lines.Count + SpareRounds;
        for (var round = 0; round < maxRounds && layout.LineCount > 0; round++)
        {
            budget.Report($"refinement round {round + 1}: fitting {layout.LineCount} line(s)", force: true);
            var mask = layout.FixedMask(tracked);
            var chiBefore = samples.ChiSquare(layout, p);
            fit = LineFitter.Fit(samples, layout, p, new LineFitRequest(options.MaxIterations, mask, budget, ProgressLabel: $"refinement round {round + 1}"));
            failure = FitFailure(fit, chiBefore, round, layout, budget);
            if (failure is not null) break;

            // a fit stopped by its iteration limit still improved χ²: pinning, merging and pruning below often remove the
            // cause (an undetermined line); when nothing is left to change, it counts as failed (no retries: the grid
            // result is kept with widened uncertainties)
            p = fit.Parameters;
            var edits = new LineSetEdits(layout, p, tracked, samples.LineGroups(layout, p));
            edits.PinWanderers();
            edits.MergeCollapsedPairs(mergeHz, options.MergeLinewidths);
            edits.DropInsignificant(fit, context.Threshold);
            (pinned, merged, dropped) = (pinned + edits.Pinned, merged + edits.Merged, dropped + edits.Dropped);
            if (edits.Changed)
            {
                foreach (var j in edits.Removed.Distinct().OrderByDescending(j => j))
                {
                    (layout, p) = layout.Without(j, p);
                    tracked.RemoveAt(j);
                }

                fit = null;
                continue;
            }

            if (!fit.Converged) failure = $"Levenberg–Marquardt did not converge ({fit.Reason} after {fit.Iterations} iterations)";
            break;
        }

        if (failure is null && fit is null && layout.LineCount > 0) failure = $"the refinement did not settle within its round limit ({maxRounds} rounds)";
        return new RoundsOutcome(layout, fit, tracked, failure, dropped, merged, pinned);
    }

    /// <summary>One tracked line per grid line; a line may wander its half cluster plus
    /// <see cref="RefineOptions.WanderLinewidths"/> widest linewidths from its grid position.</summary>
    private static List<TrackedLine> Track(RefinementContext context, ParameterLayout layout, double[] start)
    {
        var grid = context.Grid;
        var lwWide = context.WidestLinewidthHz;
        var tracked = new List<TrackedLine>();
        for (var j = 0; j < grid.Lines.Count; j++)
        {
            var l = grid.Lines[j];
            var halfCluster = 0.5 * (l.LastBin - l.FirstBin) * grid.Grid.StepHz;
            tracked.Add(new TrackedLine(l, start[layout.Position(j)], start[layout.Intensity(j)], halfCluster + context.Options.WanderLinewidths * lwWide));
        }

        return tracked;
    }

    /// <summary>Why the fit of round <paramref name="round"/> makes the refinement fail (budget used up, non-finite values,
    /// χ² raised); null when it does not.</summary>
    private static string? FitFailure(LineFitResult fit, double chiBefore, int round, ParameterLayout layout, WorkBudget budget)
    {
        if (fit.Reason == LineFitter.BudgetReason)
            return $"{budget.Exhausted} in fit round {round + 1} ({layout.LineCount} line(s) still in the fit)";
        if (!fit.Parameters.All(double.IsFinite) || !double.IsFinite(fit.ChiSquare))
            return $"the fit produced non-finite values ({fit.Reason})";
        if (fit.ChiSquare > chiBefore * (1 + ChiSquareRiseRelative) + ChiSquareRiseAbsolute)
            return $"the fit ended with a larger χ² than it started from ({fit.ChiSquare:G6} > {chiBefore:G6})";
        return null;
    }
}
