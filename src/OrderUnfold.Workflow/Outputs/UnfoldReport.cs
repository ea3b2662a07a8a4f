using OrderUnfold.Analysis;

namespace OrderUnfold.Outputs;

/// <summary>
/// report.json, schema version 2: everything an unfold found, with its inputs and diagnostics. Frequencies are relative to
/// the anchor (strongest) line unless a field says absolute; a missing value is null. Version 2 renamed the χ² fields
/// (chi2, reduced_chi2), the line verdict (order_verdict) and the tool version (tool_version): see CHANGELOG.md.
/// </summary>
public sealed record UnfoldReport(
    int SchemaVersion,
    string Tool,
    string? ToolVersion,
    string CreatedUtc,
    string Frequencies,
    IReadOnlyList<InputFileRecord> Inputs,
    IReadOnlyList<ReportInstrument> Instruments,
    IReadOnlyList<ReportAxisCalibration> Calibrations,
    FsrRefinementRecord? FsrRefinement,
    SolveRecord? Solve,
    double? ReducedChi2,
    IReadOnlyList<SweepFitRecord> Sweeps,
    double? AnchorFrequencyHz,
    double? DetectionLimit,
    bool? OrdersResolved,
    double? FoldingFsrHz,
    RefinementRecord? Refinement,
    string? UnambiguousRangeStatement,
    IReadOnlyList<ReportLine> Lines,
    IReadOnlyList<OffsetTrialRecord> OffsetTrials,
    IReadOnlyList<string> Warnings,
    IReadOnlyList<string> Notes,
    WindowWideningRecord? WindowWidening)
{
    /// <summary>The schema version this build writes (and the newest it reads).</summary>
    public const int CurrentSchemaVersion = 2;
}

/// <summary>One input file: its role in the run, path, size and SHA-256.</summary>
public sealed record InputFileRecord(string Role, string Path, long Bytes, string Sha256);

/// <summary>An instrument as the run used it.</summary>
public sealed record ReportInstrument(
    string Name,
    CavityGeometry Geometry,
    double? LengthM,
    double RefractiveIndex,
    double? FsrHz,
    double? Finesse,
    double? LinewidthHz,
    bool FinesseMeasured,
    IReadOnlyList<FamilyRecord> TransverseFamilies);

/// <summary>One scan axis as the run used it (fit quality, polynomial, period decision).</summary>
public sealed record ReportAxisCalibration(
    string Instrument,
    RampDirection Direction,
    string Source,
    string Method,
    int Degree,
    int Points,
    double? ResidualRmsHz,
    double? MaxResidualHz,
    double? Finesse,
    double? FinesseSigma,
    IReadOnlyList<double?> AxisCoefficientsHz,
    double? AxisCenter,
    double? AxisHalfRange,
    PeriodDecisionRecord? PeriodDecision,
    IReadOnlyList<string> Warnings);

/// <summary>The grid, the NNLS solve and its convergence.</summary>
public sealed record SolveRecord(
    double? GridStartHz,
    double? GridStepHz,
    int GridBins,
    double? L1Weight,
    bool OrdersResolved,
    double? UnambiguousRangeHz,
    string Solver,
    string SolverReason,
    string SolverStatus,
    string? SolverMessage,
    int SolverIterations,
    int SolverRemovals,
    double? KktViolation,
    int NonzeroBins);

/// <summary>How one sweep was fitted (offset, gain, background, noise, χ²).</summary>
public sealed record SweepFitRecord(
    string Name,
    string Instrument,
    int Samples,
    double? OffsetHz,
    double? Gain,
    double? Background,
    double? NoiseSigma,
    NoiseRecord? Noise,
    double? Chi2,
    double? ReducedChi2,
    double? ResidualRms);

/// <summary>The noise model of a sweep: dark level, quantisation step and the variance's slope with the signal.</summary>
public sealed record NoiseRecord(double? SigmaDark, double? QuantisationStep, double? VarianceSlope, string Method);

/// <summary>The off-grid refinement of the lines (Levenberg–Marquardt against the raw sweeps).</summary>
public sealed record RefinementRecord(
    bool Converged,
    string ExitReason,
    int Iterations,
    double? Chi2,
    double? ReducedChi2,
    double? DetectionThresholdDeltaChi2,
    int ClustersDroppedAsInsignificant,
    bool FellBackToGrid,
    int Groups,
    int IterationsUsed,
    int IterationBudget,
    string? BudgetExhausted,
    double? UnambiguousRangeHz,
    string? UnambiguousStatement,
    string Uncertainties);

/// <summary>One line of report.json (lines.csv holds the same values, see <see cref="LineColumns"/>).</summary>
public sealed record ReportLine(
    double? FrequencyHz,
    double? FrequencySigmaHz,
    double? FrequencyCrbHz,
    double? FrequencyAxisSigmaHz,
    double? FrequencyBootstrapSigmaHz,
    double? AbsoluteFrequencyHz,
    double? Intensity,
    double? IntensitySigma,
    double? Snr,
    double? FwhmHz,
    double? FwhmSigmaHz,
    OrderVerdict OrderVerdict,
    double? AliasShiftHz,
    double? AliasDeltaChi2,
    string? Note);

/// <summary>One sweep-offset candidate tried and its χ².</summary>
public sealed record OffsetTrialRecord(string Sweep, double? OffsetHz, double? Chi2, bool Chosen);

/// <summary>Why and how far the frequency window was widened.</summary>
public sealed record WindowWideningRecord(
    string Reason,
    IReadOnlyList<double?> FirstWindowHz,
    double? WidenedHalfWidthHz,
    IReadOnlyList<NearAliasRecord> NearAliases,
    bool SourceWiderThanWidenedWindow);

/// <summary>A shift at which the instruments' alias margin is small.</summary>
public sealed record NearAliasRecord(double? ShiftHz, double? MarginLinewidths);
