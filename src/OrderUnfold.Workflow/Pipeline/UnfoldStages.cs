using OrderUnfold.Analysis;
using OrderUnfold.Calibration;
using OrderUnfold.Inversion;
using OrderUnfold.Numerics;
using OrderUnfold.Io;
using OrderUnfold.Units;

namespace OrderUnfold.Pipeline;

/// <summary>The grid stage's result.</summary>
/// <param name="Sweeps">The sweeps the grid was solved with (built at the decided FSRs when the FSRs were decided from the lines).</param>
/// <param name="Result">The grid unfold.</param>
/// <param name="FsrRefinement">The FSR decision from the lines, when it ran (Pipeline/FsrDecisionStage.cs).</param>
/// <param name="Window">The window check, when the window was widened.</param>
/// <param name="Warnings">The FSR decision's warnings.</param>
internal sealed record GridStage(IReadOnlyList<CalibratedSweep> Sweeps, UnfoldResult Result, FsrRefinement? FsrRefinement, WindowFinding? Window, IReadOnlyList<string> Warnings);

/// <summary>The line stage's result.</summary>
/// <param name="Result">The refined result (the grid's when the refinement is off).</param>
/// <param name="Refinement">Diagnostics of the off-grid refinement, when it ran.</param>
/// <param name="Warnings">The stage's warnings (orders unchecked, a fewest-lines explanation not kept).</param>
internal sealed record LineStage(UnfoldResult Result, RefinementDiagnostics? Refinement, IReadOnlyList<string> Warnings);

/// <summary>The solving stages of an unfold: the options from [solve], the grid solve (at the decided FSRs, or with the window
/// check), and the off-grid line refinement (with the fewest-lines explanation on a widened two-cavity window).</summary>
internal static class UnfoldStages
{
    /// <summary>The unfold's options from the setup's [solve] table.</summary>
    public static UnfoldOptions OptionsFor(SolveOptions solve) => new()
    {
        WindowStartHz = solve.WindowStartHz,
        WindowEndHz = solve.WindowEndHz,
        GridStepHz = solve.GridStepHz,
        Sparsity = solve.Sparsity,
        Smoothness = solve.Smoothness,
        Solver = solve.Solver,
        MaxMemoryBytes = (long)(solve.MaxMemoryGb * 1e9),
        // with the refinement on, the grid stage only proposes candidates and the refinement's significance test
        // decides (see LineRefiner.CandidateMinSnr); without it the grid is the answer
        MinSnr = solve.Refine ? LineRefiner.CandidateMinSnr(solve.MinSnr, solve.Sparsity) : solve.MinSnr,
    };

    /// <summary>
    /// The grid unfold on sweeps built at the settled FSRs. When the FSRs were decided from the lines
    /// (<paramref name="fsrDecision"/>, Pipeline/FsrDecisionStage.cs), the grid is solved on the window as set; otherwise a
    /// source wider than the default window is caught and the window widened (Pipeline/WindowWidening.cs).
    /// </summary>
    public static GridStage SolveOnGrid(IReadOnlyList<CalibratedSweep> sweeps, UnfoldOptions options, FsrRefinement? fsrDecision, IProgress<string>? progress,
        CancellationToken cancellationToken)
    {
        if (fsrDecision is not null)
        {
            progress?.Report("unfolding with the decided FSRs");
            return new GridStage(sweeps, Unfolder.Run(sweeps, options, progress, cancellationToken), fsrDecision, null, fsrDecision.Warnings);
        }

        var (widened, window) = WindowWidening.Run(o => Unfolder.Run(sweeps, o, progress, cancellationToken), options, sweeps.Select(c => c.Instrument).ToList(), progress);
        return new GridStage(sweeps, widened, null, window, []);
    }

    /// <summary>CPU seconds the line fit keeps however much of the stage's budget a fewest-lines attempt used (its grid
    /// lines then keep their values with widened uncertainties, or a poor grid is refused).</summary>
    public const double MinLineFitAfterFewestSeconds = 1;

    /// <summary>
    /// The off-grid line refinement against the raw sweeps when refine = true, within <paramref name="cpuBudgetSeconds"/>.
    /// On a widened two-cavity window the grid's L1 cannot tell the true lines from mixtures of them, and a grid of more
    /// lines than a line fit checks is mostly small alias bins (FewestLines.AppliesToCrowdedGrid), so there the explanation
    /// with the fewest lines is tried first and kept when it fits as well (Pipeline/FewestLines.cs); the line fit after it
    /// gets what the attempt left of the budget. Without the refinement nothing checks the orders: a window wider than the
    /// unambiguous range holds aliases, which a warning says.
    /// </summary>
    public static LineStage RefineLines(GridStage grid, UnfoldOptions options, SolveOptions solve, double cpuBudgetSeconds, IProgress<string>? progress,
        CancellationToken cancellationToken)
    {
        var result = grid.Result;
        var warnings = new List<string>();
        if (!solve.Refine)
        {
            if (result.OrdersResolved && result.Grid.Count * result.Grid.StepHz > 1.01 * result.UnambiguousRangeHz)
                warnings.Add($"the window ({Quantity.FormatFrequency(result.Grid.Count * result.Grid.StepHz)}) is wider than the unambiguous range ({Quantity.FormatFrequency(result.UnambiguousRangeHz)}) " +
                             "and the line refinement is off, so no line's order was checked: lines about that range (or a multiple of it) apart may be aliases of one another (refine = true checks them)");
            if (FewestLines.AppliesToCrowdedGrid(grid.Sweeps, result, grid.Window))
                warnings.Add($"the grid holds {result.Lines.Count} lines, more than a line fit checks ({UnfoldPipeline.MaxUnrefinedLines}), and the line refinement is off: " +
                             "with many samples per linewidth most of them can be the grid's own small alias bins rather than lines (refine = true tries the explanation with the fewest lines)");
            return new LineStage(result, null, warnings);
        }

        progress?.Report("refining lines against the raw sweeps");
        var refineOptions = new RefineOptions
        {
            FitWidths = solve.FitWidths,
            Bootstrap = solve.Bootstrap,
            MinSnr = solve.MinSnr,
            DoubtfulDeltaChiSquare = solve.DoubtfulDeltaChiSquare,
            CpuBudgetSeconds = cpuBudgetSeconds,
        };
        var widened = FewestLines.Applies(grid.Sweeps, result, grid.Window);
        if (widened || FewestLines.AppliesToCrowdedGrid(grid.Sweeps, result, grid.Window))
        {
            var half = grid.Window?.HalfWidthHz ?? result.Grid.Count * result.Grid.StepHz / 2;
            var cpu0 = WorkBudget.ThreadCpuSeconds();
            var (fewest, fewestRefinement, finding) = FewestLines.Run(grid.Sweeps, result, options, half, refineOptions, progress, cancellationToken, widened);
            progress?.Report($"fewest lines: {(finding.Kept ? "kept" : "not kept")}: {finding.Reason}");
            if (finding.Kept && fewestRefinement is not null) return new LineStage(fewest, fewestRefinement, warnings);
            if (finding.Kept) result = fewest;
            else warnings.Add($"a fewest-lines explanation {(widened ? "of the widened window" : "of the crowded grid")} ({finding.Proposed} line(s)) was tried and not kept: {finding.Reason}");
            // the line fit shares the stage's budget with the attempt (at least MinLineFitAfterFewestSeconds)
            var spent = WorkBudget.ThreadCpuSeconds() - cpu0;
            refineOptions = refineOptions with { CpuBudgetSeconds = Math.Max(MinLineFitAfterFewestSeconds, cpuBudgetSeconds - spent) };
        }

        var (refined, refinement) = LineRefiner.Refine(grid.Sweeps, result, refineOptions, progress, cancellationToken);
        return new LineStage(refined, refinement, warnings);
    }
}
