using System.Text.Json.Serialization;

namespace OrderUnfold.Outputs;

/// <summary>
/// modes.json, schema version 2 (the unversioned layout before it counts as 1): the laser-mode analysis of a line list,
/// field names carrying their units. Fields that do not apply are null (a folded comb has <c>folded_step_hz</c>, an
/// unfolded one <c>spacing_hz</c>); <c>verdict</c> is present only when requirements were given.
/// </summary>
public sealed record ModesReport(
    int SchemaVersion,
    string? Source,
    bool OrdersResolved,
    int LineCount,
    double? DetectionLimit,
    double? AnchorFrequencyHz,
    MainModeRecord MainMode,
    CombRecord? Comb,
    SpacingRecord? Spacing,
    ModeCountRecord ModeCount,
    SmsrRecord Smsr,
    EnvelopeRecord Envelope,
    SecondFamilyRecord? SecondFamily,
    FoldedRecord? Folded,
    [property: JsonIgnore(Condition = JsonIgnoreCondition.WhenWritingNull)] ModesVerdictRecord? Verdict,
    IReadOnlyList<ModeLineRecord> Lines,
    IReadOnlyList<string> Notes)
{
    /// <summary>The schema version this build writes.</summary>
    public const int CurrentSchemaVersion = 2;
}

/// <summary>The strongest line (1-based index into the line list).</summary>
public sealed record MainModeRecord(int Line, double? FrequencyHz, double? Intensity);

/// <summary>The evenly spaced comb fitted to the main modes.</summary>
public sealed record CombRecord(
    bool Folded,
    double? SpacingHz,
    double? SpacingSigmaHz,
    double? FoldedStepHz,
    double? FoldedStepSigmaHz,
    double? OriginHz,
    double? OriginSigmaHz,
    int FirstK,
    int LastK,
    int Members,
    IReadOnlyList<int> MissingK,
    double? RmsResidualHz,
    double? MaxAbsResidualHz,
    double? SpacingChangePerModeHz,
    double? SpacingChangePerModeSigmaHz,
    double? ReducedChi2,
    string UncertaintyBasis,
    double? MembershipToleranceHz);

/// <summary>The mode spacing and the optical and physical length it implies.</summary>
public sealed record SpacingRecord(
    double? SpacingHz,
    double? SpacingSigmaHz,
    double? Mode0FrequencyHz,
    double? OpticalLengthM,
    double? OpticalLengthSigmaM,
    double? GroupIndex,
    double? PhysicalLengthM,
    double? PhysicalLengthSigmaM);

/// <summary>How many modes, by role.</summary>
public sealed record ModeCountRecord(double? WithinDb, int Total, int MainComb, int SecondFamily, int OffComb);

/// <summary>The side-mode suppression ratio and the side line it was measured against.</summary>
public sealed record SmsrRecord(string Kind, double? ValueDb, double? SigmaDb, int? SideLine, string? SideRole, double? SideFrequencyHz, string Explanation);

/// <summary>The Gaussian envelope fitted over the comb.</summary>
public sealed record EnvelopeRecord(
    bool Fitted,
    string Message,
    int ModesUsed,
    double? CentreK,
    double? CentreKSigma,
    double? FwhmModes,
    double? FwhmModesSigma,
    double? CentreHz,
    double? CentreSigmaHz,
    double? FwhmHz,
    double? FwhmSigmaHz,
    double? PeakDb,
    double? ReducedChi2,
    string UncertaintyBasis,
    bool CentreWithinModes);

/// <summary>A second family of lines offset from the main comb.</summary>
public sealed record SecondFamilyRecord(
    double? OffsetFraction, double? OffsetFractionSigma, double? OffsetHz, double? OffsetSigmaHz, int Members, double? StrongestDb);

/// <summary>How a folded (one-instrument) line list was read: the spacing candidates and the choice.</summary>
public sealed record FoldedRecord(
    double? FsrHz,
    double? FoldedStepHz,
    double? FoldedStepSigmaHz,
    bool WithinOneFsr,
    double? ChosenSpacingHz,
    string Choice,
    string Ambiguity,
    string SecondCavity,
    double? SuggestedSecondFsrHz,
    double? SuggestedSeparationHz,
    IReadOnlyList<SpacingCandidateRecord> Candidates);

/// <summary>One spacing that explains the folded step.</summary>
public sealed record SpacingCandidateRecord(
    double? SpacingHz,
    double? SpacingSigmaHz,
    int FsrMultiple,
    int Sign,
    int Divisor,
    double? OpticalLengthM,
    double? PhysicalLengthM,
    double? EnvelopeFwhmHz,
    bool InRange);

/// <summary>Pass or fail against the stated requirements.</summary>
public sealed record ModesVerdictRecord(bool Passed, string Line, IReadOnlyList<RequirementRecord> Requirements);

/// <summary>One requirement and its outcome.</summary>
public sealed record RequirementRecord(string Name, bool Passed, string Text);

/// <summary>One line of the mode analysis (modes.csv holds the same values).</summary>
public sealed record ModeLineRecord(
    int Line,
    string Role,
    int? K,
    double? FrequencyHz,
    double? FrequencySigmaHz,
    double? Intensity,
    double? IntensitySigma,
    double? IntensityDb,
    double? IntensityDbSigma,
    double? ResidualHz,
    double? ReadFrequencyHz,
    double? Snr);
