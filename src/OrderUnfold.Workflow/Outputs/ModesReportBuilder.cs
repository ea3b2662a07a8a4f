using OrderUnfold.Analysis.Modes;
using static OrderUnfold.Outputs.OutputJson;

namespace OrderUnfold.Outputs;

/// <summary>Builds the <see cref="ModesReport"/> record (modes.json) and the modes.csv rows of a mode analysis.</summary>
public static class ModesReportBuilder
{
    /// <summary>The report; <paramref name="verdict"/> is included when given.</summary>
    public static ModesReport Build(ModeAnalysis a, ModeVerdict? verdict = null, string? source = null) => new(
        ModesReport.CurrentSchemaVersion,
        source,
        a.OrdersResolved,
        a.Lines.Count,
        Finite(a.DetectionLimit),
        Finite(a.AbsoluteAnchorHz),
        new MainModeRecord(a.MainLineIndex + 1, Finite(a.MainLine.FrequencyHz), Finite(a.MainLine.Intensity)),
        a.Comb is { } c ? Comb(c) : null,
        a.Spacing is { } s ? new SpacingRecord(Finite(s.SpacingHz), Finite(s.SigmaHz), Finite(s.OriginHz), Finite(s.OpticalLengthM),
            Finite(s.OpticalLengthSigmaM), Finite(s.GroupIndex), Finite(s.PhysicalLengthM), Finite(s.PhysicalLengthSigmaM)) : null,
        new ModeCountRecord(Finite(a.Count.WithinDb), a.Count.Total, a.Count.MainComb, a.Count.SecondFamily, a.Count.OffComb),
        Smsr(a),
        Envelope(a.Envelope),
        a.SecondFamily is { } f ? new SecondFamilyRecord(Finite(f.OffsetFraction), Finite(f.OffsetFractionSigma), Finite(f.OffsetHz),
            Finite(f.OffsetSigmaHz), f.MemberCount, Finite(f.StrongestRelativeDb)) : null,
        a.Folded is { } folded ? Folded(folded) : null,
        verdict is null ? null : new ModesVerdictRecord(verdict.Passed, verdict.Line,
            verdict.Outcomes.Select(o => new RequirementRecord(o.Name, o.Passed, o.Text)).ToList()),
        Ordered(a).Select(l => new ModeLineRecord(l.Index + 1, RoleName(l.Role), l.K, Finite(l.FrequencyHz), Finite(l.FrequencySigmaHz),
            Finite(l.Intensity), Finite(l.IntensitySigma), Finite(l.RelativeDb), Finite(l.RelativeDbSigma), Finite(l.ResidualHz),
            Finite(l.ReadFrequencyHz), Finite(l.Snr))).ToList(),
        a.Notes.ToList());

    /// <summary>
    /// The modes.csv rows: main-comb modes by k, then second-family lines, off-comb lines and excluded lines by frequency.
    /// </summary>
    public static IEnumerable<ModeRow> Rows(ModeAnalysis analysis) => Ordered(analysis).Select(l => new ModeRow(
        l.K, RoleName(l.Role), l.FrequencyHz, l.FrequencySigmaHz, l.RelativeDb, l.RelativeDbSigma, l.ResidualHz, l.ReadFrequencyHz,
        analysis.AbsoluteAnchorHz is { } anchor && l.ReadFrequencyHz is { } read ? anchor + read : null, l.Intensity, l.IntensitySigma));

    /// <summary>Name of a role in the output files.</summary>
    public static string RoleName(LineRole role) => role switch
    {
        LineRole.MainComb => "main",
        LineRole.SecondFamily => "second",
        LineRole.OffComb => "off-comb",
        _ => "excluded",
    };

    private static IEnumerable<ModeLine> Ordered(ModeAnalysis a) =>
        a.Lines.OrderBy(l => l.Role).ThenBy(l => l.Role == LineRole.MainComb ? l.K ?? 0 : 0).ThenBy(l => l.FrequencyHz);

    private static CombRecord Comb(CombFit c) => new(
        c.Folded,
        c.Folded ? null : Finite(c.StepHz), c.Folded ? null : Finite(c.StepSigmaHz),
        c.Folded ? Finite(c.StepHz) : null, c.Folded ? Finite(c.StepSigmaHz) : null,
        Finite(c.OriginHz), Finite(c.OriginSigmaHz), c.FirstK, c.LastK, c.MemberCount, c.MissingK.ToList(),
        Finite(c.RmsResidualHz), Finite(c.MaxAbsResidualHz), Finite(c.StepChangePerModeHz), Finite(c.StepChangeSigmaHz),
        Finite(c.ReducedChiSquared), BasisName(c.Basis), Finite(c.ToleranceHz));

    private static SmsrRecord Smsr(ModeAnalysis a)
    {
        var side = a.Smsr.SideLineIndex is { } i ? a.Lines[i] : null;
        return new SmsrRecord(
            a.Smsr.Kind switch { SmsrKind.Measured => "measured", SmsrKind.LowerBound => "lower_bound", _ => "unbounded" },
            Finite(a.Smsr.ValueDb), Finite(a.Smsr.SigmaDb), a.Smsr.SideLineIndex + 1, side is null ? null : RoleName(side.Role),
            Finite(side?.FrequencyHz), a.Smsr.Explanation);
    }

    private static EnvelopeRecord Envelope(EnvelopeFit e) => new(
        e.Fitted, e.Message, e.ModesUsed, Finite(e.CentreK), Finite(e.CentreKSigma), Finite(e.FwhmModes), Finite(e.FwhmModesSigma),
        Finite(e.CentreHz), Finite(e.CentreSigmaHz), Finite(e.FwhmHz), Finite(e.FwhmSigmaHz), Finite(e.PeakRelativeDb),
        Finite(e.ReducedChiSquared), BasisName(e.Basis), e.CentreWithinModes);

    private static FoldedRecord Folded(FoldedReading f) => new(
        Finite(f.FsrHz), Finite(f.FoldedStepHz), Finite(f.FoldedStepSigmaHz), f.WithinOneFsr, Finite(f.Chosen?.SpacingHz),
        f.ChoiceReason, f.Ambiguity, f.SecondCavity, Finite(f.SuggestedSecondFsrHz), Finite(f.SuggestedSeparationHz),
        f.Candidates.Select(c => new SpacingCandidateRecord(Finite(c.SpacingHz), Finite(c.SigmaHz), c.FsrMultiple, c.Sign, c.Divisor,
            Finite(c.OpticalLengthM), Finite(c.PhysicalLengthM), Finite(c.EnvelopeFwhmHz), c.InRange)).ToList());

    private static string BasisName(UncertaintyBasis b) => b switch
    {
        UncertaintyBasis.LineSigmas => "line_sigmas",
        UncertaintyBasis.LineSigmasScaled => "line_sigmas_scaled_by_reduced_chi2",
        UncertaintyBasis.Scatter => "residual_scatter",
        _ => "none",
    };
}

/// <summary>One row of modes.csv.</summary>
public sealed record ModeRow(
    int? K,
    string Role,
    double? FrequencyHz,
    double? FrequencySigmaHz,
    double? IntensityDb,
    double? IntensityDbSigma,
    double? ResidualHz,
    double? ReadFrequencyHz,
    double? AbsoluteFrequencyHz,
    double? Intensity,
    double? IntensitySigma);

/// <summary>Columns of modes.csv.</summary>
public sealed class ModeRowColumns : TableColumns<ModeRow>
{
    /// <summary>The columns, in order.</summary>
    public ModeRowColumns()
    {
        Integer("k", m => m.K);
        Text("role", m => m.Role);
        Number("frequency_hz", m => m.FrequencyHz);
        Number("frequency_sigma_hz", m => m.FrequencySigmaHz);
        Number("intensity_db", m => m.IntensityDb);
        Number("intensity_db_sigma", m => m.IntensityDbSigma);
        Number("residual_hz", m => m.ResidualHz);
        Number("read_frequency_hz", m => m.ReadFrequencyHz);
        Number("absolute_frequency_hz", m => m.AbsoluteFrequencyHz);
        Number("intensity", m => m.Intensity);
        Number("intensity_sigma", m => m.IntensitySigma);
    }
}
