using OrderUnfold.Inversion;

namespace OrderUnfold.Analysis;

/// <summary>The refinement's results when it has no refined line to report: no grid line to start from, the grid result
/// kept after a failure, or no line significant after the rounds.</summary>
internal static class UnrefinedResults
{
    /// <summary>The grid has no line: the grid result with its detection limit.</summary>
    public static (UnfoldResult, RefinementDiagnostics) NoGridLines(RefinementContext context)
    {
        var grid = context.Grid;
        var chi0 = grid.Sweeps.Sum(s => s.ChiSquare);
        return (grid with { DetectionLimit = DetectionLimitCurve.Compute(context.Sweeps, grid, context.Threshold, 1.0) },
            new RefinementDiagnostics(true, "no lines", 0, chi0, grid.ReducedChiSquare, context.Threshold, 0) { IterationBudget = context.Options.IterationBudget });
    }

    /// <summary>
    /// The grid result, kept when the refinement failed or ran out of budget: every line keeps its grid position and
    /// intensity, its order is not judged, and it gets a frequency uncertainty that bounds the grid's own error rather
    /// than a fitted one — the larger of half its grid cluster and half the widest linewidth, combined with the anchor's
    /// (the grid cannot place a line better than its cluster, and a cluster narrower than a linewidth still leaves the
    /// peak's position within the linewidth's core). The note on each line and a warning say so.
    /// </summary>
    public static (UnfoldResult, RefinementDiagnostics) KeepGrid(RefinementContext context, string failure, LineFitResult? fit)
    {
        var (grid, options, budget, warnings) = (context.Grid, context.Options, context.Budget, context.Warnings);
        var lwWide = context.WidestLinewidthHz;
        var stepHz = grid.Grid.StepHz;
        double Bound(UnfoldedLine l) => Math.Max(0.5 * (l.LastBin - l.FirstBin) * stepHz, 0.5 * lwWide);
        // the grid handed the refinement candidates down to CandidateMinSnr for its significance test to judge; unjudged,
        // only those at the report's own threshold are lines (the strongest always stays: it anchors the frequencies)
        var top = grid.Lines.MaxBy(l => l.RawIntensity)!;
        var candidates = grid.Lines.Count;
        grid = grid with { Lines = grid.Lines.Where(l => ReferenceEquals(l, top) || l.Snr >= options.MinSnr).ToList() };
        if (grid.Lines.Count < candidates)
            warnings.Add($"{candidates - grid.Lines.Count} weaker grid candidate(s) below min_snr {options.MinSnr:G3} that the refinement did not get to judge are left out");
        var anchor = top;
        var anchorBound = Bound(anchor);
        warnings.Add($"line refinement stopped ({failure}); the {grid.Lines.Count} grid line(s) are reported unrefined, with frequency uncertainties widened to half their grid cluster or half a linewidth ({Quantity.FormatFrequency(0.5 * lwWide, 3)}), whichever is larger, and orders not judged"
                     + (budget.Exhausted?.Contains("CPU") == true ? "; the CPU-time budget depends on the machine's speed: a faster or idle machine may finish" : ""));
        var scale = grid.Lines.Max(l => l.RawIntensity);
        var result = grid with
        {
            Lines = grid.Lines.Select(l =>
            {
                var own = Bound(l);
                var sigma = ReferenceEquals(l, anchor) ? 0 : Math.Sqrt(own * own + anchorBound * anchorBound);
                return l with
                {
                    Note = $"refinement failed: {failure}; grid value kept, frequency uncertainty ±{Quantity.FormatFrequency(sigma, 2)} is a bound from the grid cluster and the linewidth, not a fitted error",
                    Verdict = OrderVerdict.Unknown,
                    FrequencySigmaHz = sigma,
                };
            }).ToList(),
            DetectionLimit = DetectionLimitCurve.Compute(context.Sweeps, grid, context.Threshold, scale),
            Warnings = warnings,
            Refined = false,
        };
        var chi = grid.Sweeps.Sum(s => s.ChiSquare);
        var diag = new RefinementDiagnostics(false, fit?.Reason ?? "failed", fit?.Iterations ?? 0, chi, grid.ReducedChiSquare, context.Threshold, 0)
        {
            FellBackToGrid = true,
            IterationsUsed = budget.Used,
            IterationBudget = options.IterationBudget,
            CpuSeconds = budget.CpuSeconds,
            BudgetExhausted = budget.Exhausted,
        };
        return (result, diag);
    }

    /// <summary>Every grid cluster was insignificant: no line, flat backgrounds, detection limit relative to the strongest grid cluster.</summary>
    public static (UnfoldResult, RefinementDiagnostics) NoLineLeft(RefinementContext context, RoundsOutcome rounds)
    {
        var (grid, samples, sweeps) = (context.Grid, context.Samples, context.Sweeps);
        context.Warnings.Add($"no line is significant after refinement: all {grid.Lines.Count} grid cluster(s) fell below the detection threshold (Δχ² {context.Threshold:G3}); intensities and the detection limit are relative to the strongest grid cluster");
        var fits = new List<SweepFit>();
        var flat = new double[samples.Count];
        double chiTotal = 0;
        for (var k = 0; k < sweeps.Count; k++)
        {
            var (start, count) = samples.Range(k);
            var mean = 0.0;
            for (var i = 0; i < count; i++) mean += samples.Signal[start + i];
            mean /= count;
            Array.Fill(flat, mean, start, count);
            var (chi, ss) = samples.SweepResiduals(k, flat);
            chiTotal += chi;
            fits.Add(grid.Sweeps[k] with
            {
                Background = mean, ChiSquare = chi, ReducedChiSquare = chi / Math.Max(1, count - 1), ResidualRms = Math.Sqrt(ss / count),
                Model = Enumerable.Repeat(mean, count).ToArray(),
            });
        }

        var scale = grid.Lines.Max(l => l.RawIntensity);
        var red = chiTotal / Math.Max(1, samples.Count - sweeps.Count);
        var result = grid with
        {
            Lines = [],
            Sweeps = fits,
            DetectionLimit = DetectionLimitCurve.Compute(sweeps, grid, context.Threshold, scale),
            Warnings = context.Warnings,
            ReducedChiSquare = red,
            Refined = true,
        };
        return (result, new RefinementDiagnostics(true, "no significant line", 0, chiTotal, red, context.Threshold, rounds.Dropped)
        {
            Merged = rounds.Merged, IterationsUsed = context.Budget.Used, IterationBudget = context.Options.IterationBudget, CpuSeconds = context.Budget.CpuSeconds,
        });
    }
}
