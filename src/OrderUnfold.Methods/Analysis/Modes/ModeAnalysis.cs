namespace OrderUnfold.Analysis.Modes;

/// <summary>What a line of the list turned out to be.</summary>
public enum LineRole
{
    /// <summary>A mode of the main comb (the one through the strongest line).</summary>
    MainComb,

    /// <summary>A line of a second comb with the same spacing but offset from the main one (another transverse-mode
    /// family, external-cavity sub-modes).</summary>
    SecondFamily,

    /// <summary>A line on neither comb (a spurious line, or a mode that could not be placed).</summary>
    OffComb,

    /// <summary>Left out of the analysis: its intensity is not positive.</summary>
    Excluded,
}

/// <summary>Kind of side-mode suppression result.</summary>
public enum SmsrKind
{
    /// <summary>A side line was seen: the SMSR is measured.</summary>
    Measured,

    /// <summary>No other line was seen; the detection limit bounds the SMSR from below.</summary>
    LowerBound,

    /// <summary>No other line was seen and there is no detection limit: nothing can be said.</summary>
    Unbounded,
}

/// <summary>One input line with what the analysis made of it.</summary>
/// <param name="Index">0-based position of the line in the input list.</param>
/// <param name="FrequencyHz">Position as given (relative to the anchor; folded when the orders are not resolved).</param>
/// <param name="FrequencySigmaHz">Uncertainty of the position, when given.</param>
/// <param name="Intensity">Linear intensity as given.</param>
/// <param name="IntensitySigma">Uncertainty of the intensity, when given.</param>
/// <param name="Snr">Signal-to-noise ratio, when given.</param>
/// <param name="RelativeDb">10·log10(intensity / strongest); null for excluded lines.</param>
/// <param name="RelativeDbSigma">Uncertainty of <paramref name="RelativeDb"/> (both intensity sigmas propagated; 0 for the strongest line).</param>
/// <param name="Role">Main comb, second family, off-comb or excluded.</param>
/// <param name="K">Mode index on the main comb (0 = strongest line, increasing with frequency); for a second-family
/// line, the index of the main-comb slot just below it.</param>
/// <param name="ResidualHz">Distance from its comb slot (main or second family), in Hz.</param>
/// <param name="ReadFrequencyHz">The line's frequency relative to the anchor as the analysis reads it: the given
/// position when the orders are resolved, the unfolded position under the chosen spacing otherwise (null when
/// the spacing is ambiguous or the line is off the comb).</param>
public sealed record ModeLine(
    int Index,
    double FrequencyHz,
    double? FrequencySigmaHz,
    double Intensity,
    double? IntensitySigma,
    double? Snr,
    double? RelativeDb,
    double? RelativeDbSigma,
    LineRole Role,
    int? K,
    double? ResidualHz,
    double? ReadFrequencyHz);

/// <summary>
/// The fitted comb ν_k = origin + k·step through the main-comb lines (weighted least squares).
/// When the orders are not resolved the fit runs on folded positions: <see cref="StepHz"/> is then the
/// spacing modulo the FSR, in (0, FSR/2], and <see cref="OriginHz"/> a folded position in [0, FSR).
/// </summary>
/// <param name="StepHz">Fitted step in Hz (the mode spacing when the orders are resolved).</param>
/// <param name="StepSigmaHz">Standard error of the step (see <paramref name="Basis"/>).</param>
/// <param name="OriginHz">Fitted position of slot k = 0 (the strongest mode).</param>
/// <param name="OriginSigmaHz">Standard error of the origin.</param>
/// <param name="OriginStepCovariance">Covariance of origin and step, Hz².</param>
/// <param name="FirstK">Lowest mode index on the comb.</param>
/// <param name="LastK">Highest mode index on the comb.</param>
/// <param name="MemberCount">Lines on the comb.</param>
/// <param name="MissingK">Slots between the first and last mode with no line (modes below the detection limit).</param>
/// <param name="RmsResidualHz">Root mean square of the members' residuals from the comb (its irregularity).</param>
/// <param name="MaxAbsResidualHz">Largest absolute residual.</param>
/// <param name="ReducedChiSquared">χ²/(n − 2) of the weighted fit, when line sigmas were used and n &gt; 2.</param>
/// <param name="Basis">How the standard errors were obtained.</param>
/// <param name="StepChangePerModeHz">From a quadratic fit ν_k = a + b·k + c·k²: the change 2c of the spacing
/// from one mode to the next (dispersion); null with fewer than four members.</param>
/// <param name="StepChangeSigmaHz">Standard error of <paramref name="StepChangePerModeHz"/>.</param>
/// <param name="Folded">True when fitted on folded positions.</param>
/// <param name="ToleranceHz">Membership tolerance at the median line (a line farther than this from every slot is off the comb).</param>
public sealed record CombFit(
    double StepHz,
    double? StepSigmaHz,
    double OriginHz,
    double? OriginSigmaHz,
    double? OriginStepCovariance,
    int FirstK,
    int LastK,
    int MemberCount,
    IReadOnlyList<int> MissingK,
    double RmsResidualHz,
    double MaxAbsResidualHz,
    double? ReducedChiSquared,
    UncertaintyBasis Basis,
    double? StepChangePerModeHz,
    double? StepChangeSigmaHz,
    bool Folded,
    double ToleranceHz);

/// <summary>The laser's mode spacing and what it says about its cavity (standing-wave resonator).</summary>
/// <param name="SpacingHz">Mode spacing Δ.</param>
/// <param name="SigmaHz">Standard error of Δ.</param>
/// <param name="OriginHz">Frequency (relative to the anchor) of mode k = 0, so mode k sits at origin + k·Δ.</param>
/// <param name="OpticalLengthM">c / (2Δ): the optical length n_g·L of a standing-wave (Fabry–Pérot) cavity.
/// A ring cavity's optical round trip is c/Δ, twice this.</param>
/// <param name="OpticalLengthSigmaM">Its standard error.</param>
/// <param name="GroupIndex">Group index used for the physical length, when given.</param>
/// <param name="PhysicalLengthM">c / (2 n_g Δ), when a group index is given.</param>
/// <param name="PhysicalLengthSigmaM">Its standard error (the group index taken as exact).</param>
public sealed record ModeSpacing(
    double SpacingHz,
    double? SigmaHz,
    double OriginHz,
    double OpticalLengthM,
    double? OpticalLengthSigmaM,
    double? GroupIndex,
    double? PhysicalLengthM,
    double? PhysicalLengthSigmaM);

/// <summary>A second comb found among the lines off the main comb, with the main comb's spacing.</summary>
/// <param name="OffsetFraction">Offset from the main comb as a fraction of the spacing, in [0, 1).</param>
/// <param name="OffsetFractionSigma">Its standard error.</param>
/// <param name="OffsetHz">Offset in Hz (fraction × step).</param>
/// <param name="OffsetSigmaHz">Its standard error.</param>
/// <param name="MemberCount">Lines in the second family.</param>
/// <param name="StrongestRelativeDb">Its strongest line relative to the strongest mode, dB.</param>
public sealed record SecondFamily(
    double OffsetFraction,
    double? OffsetFractionSigma,
    double OffsetHz,
    double? OffsetSigmaHz,
    int MemberCount,
    double StrongestRelativeDb);

/// <summary>How many lines lie within <see cref="WithinDb"/> of the strongest, in total and by role.</summary>
public sealed record ModeCount(double WithinDb, int Total, int MainComb, int SecondFamily, int OffComb);

/// <summary>
/// Side-mode suppression ratio: 10·log10(P_strongest / P_next), the next being the strongest of all other
/// lines (main comb, second family or off-comb: every line in the list counts).
/// </summary>
/// <param name="Kind">Measured, lower bound from the detection limit, or unbounded.</param>
/// <param name="ValueDb">The SMSR, or its lower bound 10·log10(1/D), in dB; null when unbounded.</param>
/// <param name="SigmaDb">Standard uncertainty of a measured SMSR from the two intensity sigmas.</param>
/// <param name="MainLineIndex">Input index of the strongest line.</param>
/// <param name="SideLineIndex">Input index of the side line, when one was seen.</param>
/// <param name="Explanation">One sentence saying what the number is.</param>
public sealed record SideModeSuppression(
    SmsrKind Kind,
    double? ValueDb,
    double? SigmaDb,
    int MainLineIndex,
    int? SideLineIndex,
    string Explanation);

/// <summary>
/// Gain envelope: a Gaussian in linear power (a parabola in dB) fitted by weighted least squares to the
/// main-comb mode intensities against the mode index.
/// </summary>
/// <param name="Fitted">False when there were fewer than three modes or the intensities do not peak.</param>
/// <param name="Message">What was done, or why not.</param>
/// <param name="ModesUsed">Modes in the fit.</param>
/// <param name="CentreK">Centre in units of the mode index (0 = strongest mode).</param>
/// <param name="CentreKSigma">Its standard error.</param>
/// <param name="FwhmModes">Full width at half maximum, in mode spacings.</param>
/// <param name="FwhmModesSigma">Its standard error.</param>
/// <param name="CentreHz">Centre frequency relative to the anchor (needs the spacing).</param>
/// <param name="CentreSigmaHz">Its standard error.</param>
/// <param name="FwhmHz">FWHM in Hz (needs the spacing).</param>
/// <param name="FwhmSigmaHz">Its standard error.</param>
/// <param name="PeakRelativeDb">Height of the fitted envelope at its centre relative to the strongest mode, dB.</param>
/// <param name="Basis">How the standard errors were obtained.</param>
/// <param name="ReducedChiSquared">χ²/(n − 3) of the weighted fit when intensity sigmas were used and n &gt; 3.</param>
/// <param name="CentreWithinModes">False when the centre lies outside the span of the modes (extrapolated).</param>
public sealed record EnvelopeFit(
    bool Fitted,
    string Message,
    int ModesUsed,
    double? CentreK = null,
    double? CentreKSigma = null,
    double? FwhmModes = null,
    double? FwhmModesSigma = null,
    double? CentreHz = null,
    double? CentreSigmaHz = null,
    double? FwhmHz = null,
    double? FwhmSigmaHz = null,
    double? PeakRelativeDb = null,
    UncertaintyBasis Basis = UncertaintyBasis.None,
    double? ReducedChiSquared = null,
    bool CentreWithinModes = true);

/// <summary>One mode spacing consistent with folded positions: Δ = (m·FSR + sign·δ) / j.</summary>
/// <param name="SpacingHz">The candidate spacing Δ.</param>
/// <param name="SigmaHz">Its standard error from the folded step (the FSR taken as exact).</param>
/// <param name="FsrMultiple">m.</param>
/// <param name="Sign">+1 for m·FSR + δ, −1 for m·FSR − δ (the mode order then runs the other way round the fold).</param>
/// <param name="Divisor">j: 1 when neighbouring lines are neighbouring modes, j &gt; 1 when only every j-th mode was seen.</param>
/// <param name="OpticalLengthM">c / (2Δ).</param>
/// <param name="PhysicalLengthM">c / (2 n_g Δ), when a group index is given.</param>
/// <param name="EnvelopeFwhmHz">Envelope FWHM under this candidate (FWHM in modes × Δ), when the envelope was fitted.</param>
/// <param name="InRange">True when within the stated spacing range (always true without a range).</param>
public sealed record SpacingCandidate(
    double SpacingHz,
    double? SigmaHz,
    int FsrMultiple,
    int Sign,
    int Divisor,
    double OpticalLengthM,
    double? PhysicalLengthM,
    double? EnvelopeFwhmHz,
    bool InRange);

/// <summary>How a line list measured with one cavity (positions known modulo its FSR) is read.</summary>
/// <param name="FsrHz">FSR of the cavity.</param>
/// <param name="FoldedStepHz">δ: the mode spacing modulo the FSR, in (0, FSR/2].</param>
/// <param name="FoldedStepSigmaHz">Its standard error.</param>
/// <param name="WithinOneFsr">True when, read with spacing δ, all modes lie within one FSR.</param>
/// <param name="Candidates">Spacings consistent with the folded positions, smallest first.</param>
/// <param name="Chosen">The candidate taken as the spacing, when the evidence (or a stated range) leaves one.</param>
/// <param name="ChoiceReason">Why a candidate was or was not chosen.</param>
/// <param name="Ambiguity">Why one cavity cannot tell the candidates apart.</param>
/// <param name="SecondCavity">How a second cavity would settle it.</param>
/// <param name="SuggestedSecondFsrHz">An FSR near this one that separates the listed candidates best, when there are several.</param>
/// <param name="SuggestedSeparationHz">With that FSR, the smallest distance at which the first neighbouring modes of two listed candidates would appear.</param>
public sealed record FoldedReading(
    double FsrHz,
    double FoldedStepHz,
    double? FoldedStepSigmaHz,
    bool WithinOneFsr,
    IReadOnlyList<SpacingCandidate> Candidates,
    SpacingCandidate? Chosen,
    string ChoiceReason,
    string Ambiguity,
    string SecondCavity,
    double? SuggestedSecondFsrHz,
    double? SuggestedSeparationHz);

/// <summary>Everything the mode analysis found. Built by <see cref="LaserModes.Analyse"/>.</summary>
/// <param name="OrdersResolved">Whether the positions were true frequency differences.</param>
/// <param name="Lines">Every input line, in input order, with its role.</param>
/// <param name="MainLineIndex">Input index of the strongest line (mode k = 0).</param>
/// <param name="Comb">The fitted main comb; null when fewer than the minimum number of lines form one.</param>
/// <param name="Spacing">Mode spacing and cavity length; null when not determined (no comb, or folded and ambiguous).</param>
/// <param name="SecondFamily">A second comb among the off-comb lines, when found (resolved orders only).</param>
/// <param name="Count">Lines within the stated level of the strongest.</param>
/// <param name="Smsr">Side-mode suppression ratio.</param>
/// <param name="Envelope">Gain-envelope fit.</param>
/// <param name="Folded">How folded positions were read; null when the orders are resolved.</param>
/// <param name="DetectionLimit">Relative detection limit of the measurement, when known.</param>
/// <param name="AbsoluteAnchorHz">Absolute frequency of the anchor, when known.</param>
/// <param name="Notes">Warnings and remarks in plain sentences.</param>
public sealed record ModeAnalysis(
    bool OrdersResolved,
    IReadOnlyList<ModeLine> Lines,
    int MainLineIndex,
    CombFit? Comb,
    ModeSpacing? Spacing,
    SecondFamily? SecondFamily,
    ModeCount Count,
    SideModeSuppression Smsr,
    EnvelopeFit Envelope,
    FoldedReading? Folded,
    double? DetectionLimit,
    double? AbsoluteAnchorHz,
    IReadOnlyList<string> Notes)
{
    /// <summary>The main-comb modes, by mode index.</summary>
    public IReadOnlyList<ModeLine> Modes => Lines.Where(l => l.Role == LineRole.MainComb).OrderBy(l => l.K).ToList();

    /// <summary>The strongest line.</summary>
    public ModeLine MainLine => Lines[MainLineIndex];
}
