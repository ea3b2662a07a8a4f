namespace OrderUnfold.Inversion;

/// <summary>
/// The fixed numbers of <see cref="Unfolder.Run"/>'s stages, named and stated in one place. The defaults are the values the
/// unfold has always used; none was fitted to a particular trace. Where a default is a rule of thumb rather than a
/// derived value it says so ("common practice").
/// </summary>
public sealed record UnfoldThresholds
{
    /// <summary>Grid bins per linewidth of the narrowest instrument when no grid step is given (step = linewidth / this).
    /// Default 4: the Airy peak (FWHM one linewidth) is then sampled by about four bins, enough for the centroid of a
    /// cluster to place a line to a small fraction of a linewidth (common practice for sampling a peak).</summary>
    public int GridBinsPerLinewidth { get; init; } = 4;

    /// <summary>The periodic response table's step is the smaller of (grid step / this) and (narrowest linewidth /
    /// <see cref="PeriodicStepsPerLinewidth"/>). Default 2: the table is at least twice as fine as the grid, so the
    /// linear interpolation in it adds less error than the grid itself.</summary>
    public int PeriodicStepsPerGridStep { get; init; } = 2;

    /// <summary>Steps of the periodic response table per linewidth (see <see cref="PeriodicStepsPerGridStep"/>). Default 20:
    /// linear interpolation of the Airy peak at a twentieth of its width errs by well under 1 % of its height
    /// (second-order interpolation error; common practice).</summary>
    public int PeriodicStepsPerLinewidth { get; init; } = 20;

    /// <summary>Quantile of a sweep's samples taken as its baseline when the first gains are estimated (gain ∝ mean −
    /// baseline). Default 0.02: low enough to sit between the peaks of any sweep whose peaks cover less than 98 % of
    /// it, high enough that one low noise sample does not set it (common practice).</summary>
    public double BaselineQuantile { get; init; } = 0.02;

    /// <summary>Largest Gauss–Newton step of a sweep origin per joint round, in linewidths of its instrument. Default 0.5:
    /// the step's linearisation of the Airy peak holds within about half a width; larger steps are taken over rounds.</summary>
    public double MaxOffsetStepLinewidths { get; init; } = 0.5;

    /// <summary>The joint rounds stop early when no origin moved by more than this many linewidths in the last round …
    /// Default 0.005: a two-hundredth of a linewidth is far below the line refinement's typical uncertainty, so a further
    /// round would change no reported line (common practice for a stopping rule).</summary>
    public double SettledOffsetLinewidths { get; init; } = 0.005;

    /// <summary>… and no relative gain changed by more than this fraction. Default 0.002 (0.2 %): well below the intensity
    /// uncertainty of a line at the detection limit (common practice for a stopping rule).</summary>
    public double SettledGainChange { get; init; } = 0.002;

    /// <summary>Reduced χ² of one sweep's grid fit above which the result warns that the model does not fit well. Default 3:
    /// a right model with an honest noise estimate gives about 1; 3 is far outside its scatter for any sweep of more than
    /// a few dozen samples (common practice).</summary>
    public double PoorFitReducedChiSquare { get; init; } = 3;

    /// <summary>Reduced χ² of the final fit of any sweep above which a run is refused (the model cannot explain the data:
    /// a wrong FSR, a sweep assigned to the wrong instrument, a wrong finesse held fixed). A correct model with an honest
    /// noise estimate gives about 1. Measured data never match the model exactly: at a signal-to-noise ratio of a few
    /// hundred, an axis error of a tenth of a linewidth (a sparse calibration of a cubic piezo) or a baseline that drifts
    /// along the sweep already gives 20–50 while the lines are right (field trace 06, simulated four-FSR sweeps), and the
    /// run says so in a warning. A wrong FSR ratio or swapped files give 70 and more (ModelMismatchTests). The joint
    /// rounds stop early on a fit that stays above it (<see cref="JointSolve"/>); the pipeline refuses such a fit.</summary>
    public const double MismatchReducedChiSquare = 60;

    /// <summary>A line whose cluster starts or ends within this many bins of the grid's ends is said to sit at the edge
    /// of the window. Default 2: the cluster then touches the last bins, where a line outside the window would leave
    /// its trace.</summary>
    public int EdgeBins { get; init; } = 2;

    /// <summary>The grid solve's weights and the active-set solver's tolerance and iteration limits.</summary>
    public GridSolveThresholds Solve { get; init; } = new();
}

/// <summary>
/// The fixed numbers of the grid solve in <see cref="Unfolder.Run"/> (part of <see cref="UnfoldThresholds"/>): how the
/// scale of the L1 and smoothness weights is measured, and the active-set solver's tolerance and iteration limits.
/// </summary>
public sealed record GridSolveThresholds
{
    /// <summary>Grid columns sampled (evenly) to measure the median column norm that scales the L1 and smoothness
    /// weights. Default 33: the median of 33 samples is stable to a few per cent for the slowly varying norms of a
    /// sweep operator, at negligible cost.</summary>
    public int ColumnNormProbes { get; init; } = 33;

    /// <summary>KKT tolerance of the active-set solver relative to the L1 weight. Default 10⁻³: a thousandth of the
    /// penalty's own scale is far below what changes a line (common practice).</summary>
    public double ToleranceRelative { get; init; } = 1e-3;

    /// <summary>Smallest absolute KKT tolerance of the active-set solver (when the L1 weight is zero). Default 10⁻⁹.</summary>
    public double ToleranceFloor { get; init; } = 1e-9;

    /// <summary>Fewest and most iterations of the active-set solver; between them a quarter of the grid bins. The active
    /// set of a line spectrum stays far below this; a model that does not fit the data (wrong axis, wrong instrument)
    /// keeps adding bins, and the cap keeps the cost finite: the result then says it did not converge. Defaults 500 and
    /// 2500; <see cref="UnfoldMemory.EstimateUnfoldBytes"/> assumes the same cap.</summary>
    public int MinIterations { get; init; } = 500;

    /// <inheritdoc cref="MinIterations"/>
    public int MaxIterations { get; init; } = 2500;

    /// <summary>Grid bins per solver iteration allowed between <see cref="MinIterations"/> and
    /// <see cref="MaxIterations"/>. Default 4.</summary>
    public int BinsPerIteration { get; init; } = 4;
}
