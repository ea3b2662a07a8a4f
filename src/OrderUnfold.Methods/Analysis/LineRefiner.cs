using MathNet.Numerics.LinearAlgebra;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Units;

namespace OrderUnfold.Analysis;

/// <summary>Options of <see cref="LineRefiner"/>.</summary>
public sealed record RefineOptions
{
    /// <summary>Fit an intrinsic Lorentzian width per line (convolved with the Airy profile).</summary>
    public bool FitWidths { get; init; }

    /// <summary>Residual-bootstrap replicates (0: none).</summary>
    public int Bootstrap { get; init; }

    /// <summary>Seed of the bootstrap resampling.</summary>
    public int Seed { get; init; } = 1;

    /// <summary>Minimum signal-to-noise ratio (intensity / its standard error) for a line to be kept.</summary>
    public double MinSnr { get; init; } = 5;

    /// <summary>Δχ² to the best alternative placement below which a line's order is called doubtful.</summary>
    public double DoubtfulDeltaChiSquare { get; init; } = 25;

    /// <summary>Alternative placements (near-aliases) tried per line.</summary>
    public int AliasCandidates { get; init; } = 4;

    /// <summary>Maximum Levenberg–Marquardt iterations of one fit.</summary>
    public int MaxIterations { get; init; } = 200;

    /// <summary>Iterations allowed to the whole refinement (every fit round, the order check's quick refits and full
    /// refits, the bootstrap replicates, counted together; default 3000). When it is used up the refinement stops with a
    /// warning: lines not yet refined keep their grid values with widened uncertainties, checks not yet made are marked
    /// as not made.</summary>
    public int IterationBudget { get; init; } = 3000;

    /// <summary>CPU seconds (of the calling thread) allowed to the whole refinement; ≤ 0 or infinity: no
    /// limit (default 8 s). Reached, it stops the refinement like <see cref="IterationBudget"/>. Results that hit it depend on the
    /// machine's speed, and the warning says so.</summary>
    public double CpuBudgetSeconds { get; init; } = 8;

    /// <summary>Lines within this many linewidths (folded into each instrument's FSR) of a sample enter that sample's row of
    /// the Gauss–Newton matrix (default 6; the model and the gradient always use every line). Lines farther apart than
    /// twice this in every instrument fit as independent blocks. Infinity: the dense matrix.</summary>
    public double JacobianCutoffLinewidths { get; init; } = 6;

    /// <summary>Two refined lines closer than this many linewidths (of the narrowest instrument) are merged into one.</summary>
    public double MergeLinewidths { get; init; } = 0.5;

    /// <summary>A refined line that ends farther than this many linewidths (of the widest instrument) outside its grid
    /// cluster is pinned at its grid position (its position is not refined and gets no uncertainty).</summary>
    public double WanderLinewidths { get; init; } = 2;
}

/// <summary>How sure the tool is that a line sits in the order given.</summary>
public enum OrderVerdict
{
    /// <summary>Every alternative placement tried fits clearly worse (Δχ² above the threshold).</summary>
    Secure,

    /// <summary>An alternative placement fits almost as well.</summary>
    Doubtful,

    /// <summary>One instrument only, or no refinement: orders are not determined.</summary>
    Unknown,

    /// <summary>Orders are resolved but the line was not refined, so no alternative placement was tried.</summary>
    Unchecked,
}

/// <summary>Diagnostics of one refinement.</summary>
/// <param name="Converged">True when Levenberg–Marquardt stopped on a convergence criterion.</param>
/// <param name="ExitReason">Why Levenberg–Marquardt stopped, as text.</param>
/// <param name="Iterations">Iterations used (last fit).</param>
/// <param name="ChiSquare">χ² at the solution.</param>
/// <param name="ReducedChiSquare">χ² per degree of freedom.</param>
/// <param name="DetectionThresholdDeltaChiSquare">Δχ² a line must add to be kept (from MinSnr and the BIC penalty).</param>
/// <param name="Dropped">Grid clusters dropped as not significant after refinement.</param>
public sealed record RefinementDiagnostics(bool Converged, string ExitReason, int Iterations, double ChiSquare, double ReducedChiSquare,
    double DetectionThresholdDeltaChiSquare, int Dropped)
{
    /// <summary>Pairs of lines merged because they ended closer than <see cref="RefineOptions.MergeLinewidths"/>.</summary>
    public int Merged { get; init; }

    /// <summary>Lines whose position was pinned at the grid value because the refinement moved them away from their cluster.</summary>
    public int Pinned { get; init; }

    /// <summary>True when the refinement failed as a whole and the grid result was kept.</summary>
    public bool FellBackToGrid { get; init; }

    /// <summary>Iterations spent by the whole refinement (all fits, order check and bootstrap; see
    /// <see cref="RefineOptions.IterationBudget"/>).</summary>
    public int IterationsUsed { get; init; }

    /// <summary>The iteration budget the refinement ran with.</summary>
    public int IterationBudget { get; init; }

    /// <summary>CPU seconds the refinement used (calling thread).</summary>
    public double CpuSeconds { get; init; }

    /// <summary>Null when the refinement finished within its budget; otherwise which budget ran out and in which stage.</summary>
    public string? BudgetExhausted { get; init; }

    /// <summary>Independent line groups of the last fit (lines sharing no sample within the Jacobian cutoff).</summary>
    public int Groups { get; init; }

    /// <summary>
    /// Range over which the order of the weakest kept line is unambiguous for these instruments and this noise: the
    /// smallest shift Δ (beyond the line's own peak) at which a copy of that line moved by Δ would fit within the
    /// doubtful Δχ² threshold (estimated from each sweep's sample density, see <see cref="OrderAmbiguity.AliasChiSquareEstimate"/>).
    /// Null when not computed.
    /// </summary>
    public double? UnambiguousRangeHz { get; init; }

    /// <summary>True when no confusable shift was found up to <see cref="UnambiguousRangeHz"/> (the range is at least that).</summary>
    public bool UnambiguousRangeIsLowerBound { get; init; }

    /// <summary>Relative intensity (to the anchor) of the line <see cref="UnambiguousRangeHz"/> was computed for.</summary>
    public double? UnambiguousForIntensity { get; init; }

    /// <summary>One sentence stating the unambiguous range for these instruments and this noise.</summary>
    public string? UnambiguousStatement { get; init; }
}

/// <summary>
/// Off-grid refinement of the lines of an NNLS grid solution against the raw sweeps: positions, intensities
/// (optionally intrinsic widths), per-sweep offsets, gains and backgrounds fitted jointly by Levenberg–Marquardt
/// (<see cref="LevenbergMarquardt"/>, on the normal equations). Gives standard errors (covariance scaled by the reduced χ²), the Cramér–Rao bound
/// (the unscaled covariance at the solution), optional residual-bootstrap errors, significance-based pruning,
/// a detection-limit curve, and for each line Δχ² to its best alternative placement (order confidence).
/// </summary>
/// <remarks>
/// Failure handling: a fit that does not converge, gives non-finite values or raises χ² keeps the grid result with
/// a note on every line; a line that wanders off its grid cluster is pinned at its grid position; two lines that end
/// closer than <see cref="RefineOptions.MergeLinewidths"/> are merged; a line whose parameters lie in the null space
/// of a singular Fisher matrix gets no uncertainty and a note. No reported number is NaN: missing values are null.
/// <para>The stages, each in its own type: <see cref="RefinementRounds"/> (fit rounds with pinning, merging and pruning,
/// <see cref="LineSetEdits"/>), <see cref="LineFitter"/> (one Levenberg–Marquardt fit and its covariance, on
/// <see cref="SweepSamples"/>), <see cref="OrderCheck"/> (alternative placements), <see cref="LineUncertainties"/>
/// (bootstrap, scan axes), <see cref="RefinedResultAssembly"/> (the result), <see cref="UnrefinedResults"/> (no line, or
/// the grid kept), <see cref="DetectionLimitCurve"/> and <see cref="OrderAmbiguity"/>.</para>
/// </remarks>
public static class LineRefiner
{
    /// <summary>Refines <paramref name="grid"/>'s lines against <paramref name="sweeps"/> (the same sweeps, in the same
    /// order, that produced the grid result). Progress lines go to <paramref name="progress"/> at least about once a
    /// second of wall time while fits run. A cancelled <paramref name="cancellationToken"/> stops every fit at its next
    /// iteration (it rides with the refinement's <see cref="WorkBudget"/>) with <see cref="OperationCanceledException"/>.</summary>
    public static (UnfoldResult Result, RefinementDiagnostics Diagnostics) Refine(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, RefineOptions? options = null,
        IProgress<string>? progress = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(sweeps);
        ArgumentNullException.ThrowIfNull(grid);
        options ??= new RefineOptions();
        if (sweeps.Count == 0) throw new ArgumentException("no sweeps to refine against", nameof(sweeps));
        if (sweeps.Count != grid.Sweeps.Count)
            throw new ArgumentException($"the grid result has {grid.Sweeps.Count} sweep fits but {sweeps.Count} sweeps were given", nameof(grid));

        cancellationToken.ThrowIfCancellationRequested();
        var budget = new WorkBudget(options.IterationBudget, options.CpuBudgetSeconds, progress, cancellationToken);
        var samples = new SweepSamples(sweeps) { CutoffLinewidths = options.JacobianCutoffLinewidths };
        var context = new RefinementContext(sweeps, grid, options, samples, Threshold(options, samples.Count), grid.Warnings.ToList(), budget);
        if (grid.Lines.Count == 0) return UnrefinedResults.NoGridLines(context);
        var rounds = RefinementRounds.Run(context);
        if (rounds.Failure is not null) return UnrefinedResults.KeepGrid(context, rounds.Failure, rounds.Fit);
        if (rounds.Layout.LineCount == 0) return UnrefinedResults.NoLineLeft(context, rounds);
        return RefinedResultAssembly.Assemble(context, rounds);
    }

    /// <summary>
    /// The grid-stage SNR down to which clusters should be handed to the refinement when it decides with
    /// <paramref name="minSnr"/>: MinSnr − sparsity, at least 1. The L1 weight λ = sparsity·σ·‖c‖ shrinks a cluster's
    /// amplitude by about λ/‖c‖², i.e. its grid SNR (amplitude × ‖c‖/σ) by about the sparsity, so a line of SNR 7 shows
    /// about 4 on the grid; the refinement refits it without the penalty and keeps it only if it passes its own test.
    /// Measured (simulated, one cavity, 20 seeds): a line of refined SNR ≈ 7 reached the refinement 3 times in 20 with
    /// the grid threshold at MinSnr = 5, 20 in 20 with this one, and no extra line appeared.
    /// </summary>
    public static double CandidateMinSnr(double minSnr, double sparsity) => Math.Max(1, minSnr - Math.Max(0, sparsity));

    /// <summary>Δχ² a line must add: the larger of MinSnr² and the BIC penalty for two parameters, 2·ln(m).</summary>
    public static double Threshold(RefineOptions options, int samples) => Math.Max(options.MinSnr * options.MinSnr, 2 * Math.Log(Math.Max(2, samples)));

    /// <summary>The value, or null when it is not finite (no reported number is NaN).</summary>
    internal static double? FiniteOrNull(double v) => double.IsFinite(v) ? v : null;
}
