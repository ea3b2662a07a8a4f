using System.Text.Json.Serialization;

namespace OrderUnfold.Outputs;

/// <summary>
/// calibration.json, schema version 2: the instruments and every axis polynomial with its fit quality, so archived
/// sweeps of one session share one calibration. Version 1 files (with "version": 1 in place of "schema_version") have
/// the same fields and are still read.
/// </summary>
public sealed record CalibrationFileRecord(
    string? Format,
    int? SchemaVersion,
    [property: JsonIgnore(Condition = JsonIgnoreCondition.WhenWritingNull)] int? Version,
    string? Source,
    IReadOnlyList<SavedInstrument>? Instruments,
    IReadOnlyList<SavedAxis>? Axes)
{
    /// <summary>The value of <c>format</c>.</summary>
    public const string FormatName = "orderunfold-calibration";

    /// <summary>The schema version this build writes.</summary>
    public const int CurrentSchemaVersion = 2;

    /// <summary>The only version before schema_version existed (same fields).</summary>
    public const int LegacyVersion = 1;
}

/// <summary>An instrument as calibrated.</summary>
public sealed record SavedInstrument(
    [property: JsonRequired] string Name,
    [property: JsonRequired] CavityGeometry Geometry,
    [property: JsonRequired] double FsrHz,
    [property: JsonRequired] double Finesse,
    double? LengthM,
    double? RefractiveIndex,
    bool? FinesseMeasured,
    IReadOnlyList<FamilyRecord>? TransverseFamilies);

/// <summary>One saved scan axis: the polynomial (coefficients in Hz over the normalised scan variable) and its quality.</summary>
public sealed record SavedAxis(
    [property: JsonRequired] string Instrument,
    [property: JsonRequired] RampDirection Direction,
    string? Method,
    string? Source,
    [property: JsonRequired] IReadOnlyList<double> CoefficientsHz,
    [property: JsonRequired] double Center,
    [property: JsonRequired] double HalfRange,
    [property: JsonRequired] double XMin,
    [property: JsonRequired] double XMax,
    double? ResidualRmsHz,
    IReadOnlyList<double>? ShapeCovarianceHz2,
    int Points,
    double? Finesse,
    double? FinesseSigma,
    PeriodDecisionRecord? PeriodDecision);

/// <summary>A transverse-mode family: index, Gouy offset and apparent offset (fractions of the FSR), relative height, basis.</summary>
public sealed record FamilyRecord(
    [property: JsonRequired] int N,
    [property: JsonRequired] double? GouyOffsetFsr,
    double? ApparentOffsetFsr,
    [property: JsonRequired] double? RelativeHeight,
    string? Basis);

/// <summary>The decision on a sweep's period with its evidence (candidates and their scores).</summary>
public sealed record PeriodDecisionRecord(
    double? PeriodScanUnits,
    double? PeriodHz,
    double? StatedFsrHz,
    string Basis,
    string Fundamental,
    IReadOnlyList<PeriodCandidateRecord> Candidates,
    IReadOnlyList<FamilyRecord> Families);

/// <summary>One period candidate and how well it explains the peaks.</summary>
public sealed record PeriodCandidateRecord(
    string Label,
    double? PeriodScanUnits,
    double? Explained,
    int PredictedRepeats,
    double? HeightAgreement,
    int Groups,
    bool Consistent,
    bool Chosen);

/// <summary>The FSR refinement from the data (per instrument, the known intervals and how far lines moved).</summary>
public sealed record FsrRefinementRecord(
    int Rounds,
    double? ReducedChi2Before,
    double? ReducedChi2After,
    double? MaxLineShiftHz,
    IReadOnlyList<FsrInstrumentRecord> Instruments,
    IReadOnlyList<KnownIntervalRecord> KnownIntervals,
    IReadOnlyList<LineShiftRecord> LineShifts,
    IReadOnlyList<string> Notes);

/// <summary>One instrument's refined FSR.</summary>
public sealed record FsrInstrumentRecord(string Instrument, double? NominalFsrHz, double? RefinedFsrHz, double? SigmaHz, double? RelativeChange, string Basis);

/// <summary>A pair of lines taken to be a known interval (or a multiple of it) apart.</summary>
public sealed record KnownIntervalRecord(double? LowerHz, double? UpperHz, int Multiple, double? StatedHz, double? MeasuredHz, double? SigmaHz);

/// <summary>How one line moved because of the FSR refinement.</summary>
public sealed record LineShiftRecord(double? BeforeHz, double? AfterHz);

/// <summary>
/// calibration-report.json, schema version 2: per axis how it was found and how well it fits, the fitted finesse with the
/// peak-shape check, transverse-mode families, and the FSR refinement when it ran.
/// </summary>
public sealed record CalibrationReportRecord(
    int SchemaVersion,
    string Tool,
    string? ToolVersion,
    string CreatedUtc,
    string Source,
    IReadOnlyList<CalibratedInstrumentRecord> Instruments,
    IReadOnlyList<CalibrationAxisRecord> Axes,
    FsrRefinementRecord? FsrRefinement,
    IReadOnlyList<string> Warnings)
{
    /// <summary>The schema version this build writes.</summary>
    public const int CurrentSchemaVersion = 2;
}

/// <summary>An instrument as calibrated beside what the setup stated.</summary>
public sealed record CalibratedInstrumentRecord(
    string Name, CavityGeometry Geometry, double? FsrHz, double? StatedFsrHz, double? Finesse, double? StatedFinesse, double? LinewidthHz);

/// <summary>One axis in the calibration report.</summary>
public sealed record CalibrationAxisRecord(
    string Instrument,
    RampDirection Direction,
    string Source,
    string Method,
    bool FromRepeats,
    int Degree,
    int Points,
    int? PairsUsed,
    int? PairsRejected,
    double? ResidualRmsHz,
    double? ResidualRmsLinewidths,
    double? MaxResidualHz,
    double? AxisSigmaHz,
    double? XMin,
    double? XMax,
    double? Finesse,
    double? FinesseSigma,
    FinesseFitRecord? FinesseFit,
    PeriodDecisionRecord? PeriodDecision,
    TransverseModesRecord? TransverseModes,
    IReadOnlyList<double?> CoefficientsHz,
    double? Center,
    double? HalfRange,
    IReadOnlyList<string> Warnings);

/// <summary>The finesse fitted to the transmission peaks, with the averaged peak shape against the Airy function.</summary>
public sealed record FinesseFitRecord(
    double? WeightedMean,
    double? Sigma,
    int Peaks,
    double? ScatterChi2,
    bool Consistent,
    bool? ProfileAiryShaped,
    double? ProfileRmsDeviation,
    double? ProfileOddRms,
    double? ProfileNoiseRms,
    IReadOnlyList<double?>? ProfileDetuningFwhm,
    IReadOnlyList<double?>? ProfileMeasured);

/// <summary>Transverse-mode families seen beside the main peaks.</summary>
public sealed record TransverseModesRecord(int MainPeaks, double? AlternationRatio, IReadOnlyList<TransverseFamilyRecord> Families);

/// <summary>One family seen in a calibration sweep.</summary>
public sealed record TransverseFamilyRecord(double? OffsetFsr, double? RelativeHeight, int Count, int Periods, bool HalfPeriod);
