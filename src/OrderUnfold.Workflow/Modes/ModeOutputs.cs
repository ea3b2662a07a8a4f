using System.Globalization;
using System.Text;
using System.Text.Json;
using OrderUnfold.Io;

namespace OrderUnfold.Analysis.Modes;

/// <summary>
/// Writes a mode analysis as <c>modes.json</c> (everything, field names carry their units) and
/// <c>modes.csv</c> (one row per line). Both are written atomically (<see cref="AtomicFile"/>).
/// </summary>
public static class ModeOutputs
{
    /// <summary>File name of the JSON report.</summary>
    public const string JsonFileName = "modes.json";

    /// <summary>File name of the per-line table.</summary>
    public const string CsvFileName = "modes.csv";

    /// <summary>File name of the plot.</summary>
    public const string PngFileName = "modes.png";

    /// <summary>Header of <c>modes.csv</c>.</summary>
    public static readonly string[] CsvColumns =
    [
        "k", "role", "frequency_hz", "frequency_sigma_hz", "intensity_db", "intensity_db_sigma", "residual_hz",
        "read_frequency_hz", "absolute_frequency_hz", "intensity", "intensity_sigma",
    ];

    /// <summary>Writes <c>modes.json</c> to <paramref name="path"/>; <paramref name="verdict"/> is included when given.</summary>
    public static void WriteJson(string path, ModeAnalysis analysis, ModeVerdict? verdict = null, string? source = null) =>
        AtomicFile.WriteAllBytes(path, JsonBytes(analysis, verdict, source));

    /// <summary>Writes <c>modes.csv</c> to <paramref name="path"/>.</summary>
    public static void WriteCsv(string path, ModeAnalysis analysis) => AtomicFile.WriteAllText(path, CsvText(analysis));

    /// <summary>
    /// The table: main-comb modes by k, then second-family lines, off-comb lines and excluded lines by frequency.
    /// <c>intensity_db</c> is 10·log10(intensity / strongest) with its sigma; <c>read_frequency_hz</c> is the
    /// frequency as read (unfolded under the chosen spacing when folded); empty cells mean "not known".
    /// </summary>
    public static string CsvText(ModeAnalysis analysis)
    {
        var sb = new StringBuilder();
        sb.Append(string.Join(",", CsvColumns)).Append('\n');
        foreach (var l in Ordered(analysis))
        {
            double? absolute = analysis.AbsoluteAnchorHz is { } a && l.ReadFrequencyHz is { } r ? a + r : null;
            string[] cells =
            [
                l.K?.ToString(CultureInfo.InvariantCulture) ?? "",
                RoleName(l.Role),
                Num(l.FrequencyHz),
                Num(l.FrequencySigmaHz),
                Num(l.RelativeDb),
                Num(l.RelativeDbSigma),
                Num(l.ResidualHz),
                Num(l.ReadFrequencyHz),
                Num(absolute),
                Num(l.Intensity),
                Num(l.IntensitySigma),
            ];
            sb.Append(string.Join(",", cells)).Append('\n');
        }

        return sb.ToString();
    }

    /// <summary>The JSON report as UTF-8 bytes.</summary>
    public static byte[] JsonBytes(ModeAnalysis a, ModeVerdict? verdict = null, string? source = null)
    {
        using var stream = new MemoryStream();
        using (var w = new Utf8JsonWriter(stream, new JsonWriterOptions { Indented = true, Encoder = System.Text.Encodings.Web.JavaScriptEncoder.UnsafeRelaxedJsonEscaping }))
        {
            w.WriteStartObject();
            if (source is not null) w.WriteString("source", source);
            w.WriteBoolean("orders_resolved", a.OrdersResolved);
            w.WriteNumber("line_count", a.Lines.Count);
            Number(w, "detection_limit", a.DetectionLimit);
            Number(w, "anchor_frequency_hz", a.AbsoluteAnchorHz);

            w.WriteStartObject("main_mode");
            w.WriteNumber("line", a.MainLineIndex + 1);
            Number(w, "frequency_hz", a.MainLine.FrequencyHz);
            Number(w, "intensity", a.MainLine.Intensity);
            w.WriteEndObject();

            WriteComb(w, a);
            WriteSpacing(w, a.Spacing);

            w.WriteStartObject("mode_count");
            Number(w, "within_db", a.Count.WithinDb);
            w.WriteNumber("total", a.Count.Total);
            w.WriteNumber("main_comb", a.Count.MainComb);
            w.WriteNumber("second_family", a.Count.SecondFamily);
            w.WriteNumber("off_comb", a.Count.OffComb);
            w.WriteEndObject();

            w.WriteStartObject("smsr");
            w.WriteString("kind", a.Smsr.Kind switch { SmsrKind.Measured => "measured", SmsrKind.LowerBound => "lower_bound", _ => "unbounded" });
            Number(w, "value_db", a.Smsr.ValueDb);
            Number(w, "sigma_db", a.Smsr.SigmaDb);
            if (a.Smsr.SideLineIndex is { } side)
            {
                w.WriteNumber("side_line", side + 1);
                w.WriteString("side_role", RoleName(a.Lines[side].Role));
                Number(w, "side_frequency_hz", a.Lines[side].FrequencyHz);
            }

            w.WriteString("explanation", a.Smsr.Explanation);
            w.WriteEndObject();

            WriteEnvelope(w, a.Envelope);
            WriteSecond(w, a.SecondFamily);
            WriteFolded(w, a.Folded);

            if (verdict is not null)
            {
                w.WriteStartObject("verdict");
                w.WriteBoolean("passed", verdict.Passed);
                w.WriteString("line", verdict.Line);
                w.WriteStartArray("requirements");
                foreach (var o in verdict.Outcomes)
                {
                    w.WriteStartObject();
                    w.WriteString("name", o.Name);
                    w.WriteBoolean("passed", o.Passed);
                    w.WriteString("text", o.Text);
                    w.WriteEndObject();
                }

                w.WriteEndArray();
                w.WriteEndObject();
            }

            w.WriteStartArray("lines");
            foreach (var l in Ordered(a))
            {
                w.WriteStartObject();
                w.WriteNumber("line", l.Index + 1);
                w.WriteString("role", RoleName(l.Role));
                if (l.K is { } k) w.WriteNumber("k", k);
                else w.WriteNull("k");
                Number(w, "frequency_hz", l.FrequencyHz);
                Number(w, "frequency_sigma_hz", l.FrequencySigmaHz);
                Number(w, "intensity", l.Intensity);
                Number(w, "intensity_sigma", l.IntensitySigma);
                Number(w, "intensity_db", l.RelativeDb);
                Number(w, "intensity_db_sigma", l.RelativeDbSigma);
                Number(w, "residual_hz", l.ResidualHz);
                Number(w, "read_frequency_hz", l.ReadFrequencyHz);
                Number(w, "snr", l.Snr);
                w.WriteEndObject();
            }

            w.WriteEndArray();

            w.WriteStartArray("notes");
            foreach (var n in a.Notes) w.WriteStringValue(n);
            w.WriteEndArray();
            w.WriteEndObject();
        }

        stream.WriteByte((byte)'\n');
        return stream.ToArray();
    }

    private static void WriteComb(Utf8JsonWriter w, ModeAnalysis a)
    {
        if (a.Comb is not { } c)
        {
            w.WriteNull("comb");
            return;
        }

        w.WriteStartObject("comb");
        w.WriteBoolean("folded", c.Folded);
        Number(w, c.Folded ? "folded_step_hz" : "spacing_hz", c.StepHz);
        Number(w, c.Folded ? "folded_step_sigma_hz" : "spacing_sigma_hz", c.StepSigmaHz);
        Number(w, "origin_hz", c.OriginHz);
        Number(w, "origin_sigma_hz", c.OriginSigmaHz);
        w.WriteNumber("first_k", c.FirstK);
        w.WriteNumber("last_k", c.LastK);
        w.WriteNumber("members", c.MemberCount);
        w.WriteStartArray("missing_k");
        foreach (var k in c.MissingK) w.WriteNumberValue(k);
        w.WriteEndArray();
        Number(w, "rms_residual_hz", c.RmsResidualHz);
        Number(w, "max_abs_residual_hz", c.MaxAbsResidualHz);
        Number(w, "spacing_change_per_mode_hz", c.StepChangePerModeHz);
        Number(w, "spacing_change_per_mode_sigma_hz", c.StepChangeSigmaHz);
        Number(w, "reduced_chi_squared", c.ReducedChiSquared);
        w.WriteString("uncertainty_basis", BasisName(c.Basis));
        Number(w, "membership_tolerance_hz", c.ToleranceHz);
        w.WriteEndObject();
    }

    private static void WriteSpacing(Utf8JsonWriter w, ModeSpacing? s)
    {
        if (s is null)
        {
            w.WriteNull("spacing");
            return;
        }

        w.WriteStartObject("spacing");
        Number(w, "spacing_hz", s.SpacingHz);
        Number(w, "spacing_sigma_hz", s.SigmaHz);
        Number(w, "mode0_frequency_hz", s.OriginHz);
        Number(w, "optical_length_m", s.OpticalLengthM);
        Number(w, "optical_length_sigma_m", s.OpticalLengthSigmaM);
        Number(w, "group_index", s.GroupIndex);
        Number(w, "physical_length_m", s.PhysicalLengthM);
        Number(w, "physical_length_sigma_m", s.PhysicalLengthSigmaM);
        w.WriteEndObject();
    }

    private static void WriteEnvelope(Utf8JsonWriter w, EnvelopeFit e)
    {
        w.WriteStartObject("envelope");
        w.WriteBoolean("fitted", e.Fitted);
        w.WriteString("message", e.Message);
        w.WriteNumber("modes_used", e.ModesUsed);
        Number(w, "centre_k", e.CentreK);
        Number(w, "centre_k_sigma", e.CentreKSigma);
        Number(w, "fwhm_modes", e.FwhmModes);
        Number(w, "fwhm_modes_sigma", e.FwhmModesSigma);
        Number(w, "centre_hz", e.CentreHz);
        Number(w, "centre_sigma_hz", e.CentreSigmaHz);
        Number(w, "fwhm_hz", e.FwhmHz);
        Number(w, "fwhm_sigma_hz", e.FwhmSigmaHz);
        Number(w, "peak_db", e.PeakRelativeDb);
        Number(w, "reduced_chi_squared", e.ReducedChiSquared);
        w.WriteString("uncertainty_basis", BasisName(e.Basis));
        w.WriteBoolean("centre_within_modes", e.CentreWithinModes);
        w.WriteEndObject();
    }

    private static void WriteSecond(Utf8JsonWriter w, SecondFamily? s)
    {
        if (s is null)
        {
            w.WriteNull("second_family");
            return;
        }

        w.WriteStartObject("second_family");
        Number(w, "offset_fraction", s.OffsetFraction);
        Number(w, "offset_fraction_sigma", s.OffsetFractionSigma);
        Number(w, "offset_hz", s.OffsetHz);
        Number(w, "offset_sigma_hz", s.OffsetSigmaHz);
        w.WriteNumber("members", s.MemberCount);
        Number(w, "strongest_db", s.StrongestRelativeDb);
        w.WriteEndObject();
    }

    private static void WriteFolded(Utf8JsonWriter w, FoldedReading? f)
    {
        if (f is null)
        {
            w.WriteNull("folded");
            return;
        }

        w.WriteStartObject("folded");
        Number(w, "fsr_hz", f.FsrHz);
        Number(w, "folded_step_hz", f.FoldedStepHz);
        Number(w, "folded_step_sigma_hz", f.FoldedStepSigmaHz);
        w.WriteBoolean("within_one_fsr", f.WithinOneFsr);
        if (f.Chosen is { } chosen) Number(w, "chosen_spacing_hz", chosen.SpacingHz);
        else w.WriteNull("chosen_spacing_hz");
        w.WriteString("choice", f.ChoiceReason);
        w.WriteString("ambiguity", f.Ambiguity);
        w.WriteString("second_cavity", f.SecondCavity);
        Number(w, "suggested_second_fsr_hz", f.SuggestedSecondFsrHz);
        Number(w, "suggested_separation_hz", f.SuggestedSeparationHz);
        w.WriteStartArray("candidates");
        foreach (var c in f.Candidates)
        {
            w.WriteStartObject();
            Number(w, "spacing_hz", c.SpacingHz);
            Number(w, "spacing_sigma_hz", c.SigmaHz);
            w.WriteNumber("fsr_multiple", c.FsrMultiple);
            w.WriteNumber("sign", c.Sign);
            w.WriteNumber("divisor", c.Divisor);
            Number(w, "optical_length_m", c.OpticalLengthM);
            Number(w, "physical_length_m", c.PhysicalLengthM);
            Number(w, "envelope_fwhm_hz", c.EnvelopeFwhmHz);
            w.WriteBoolean("in_range", c.InRange);
            w.WriteEndObject();
        }

        w.WriteEndArray();
        w.WriteEndObject();
    }

    private static IEnumerable<ModeLine> Ordered(ModeAnalysis a) =>
        a.Lines.OrderBy(l => l.Role).ThenBy(l => l.Role == LineRole.MainComb ? l.K ?? 0 : 0).ThenBy(l => l.FrequencyHz);

    /// <summary>Name of a role in the output files.</summary>
    public static string RoleName(LineRole role) => role switch
    {
        LineRole.MainComb => "main",
        LineRole.SecondFamily => "second",
        LineRole.OffComb => "off-comb",
        _ => "excluded",
    };

    private static string BasisName(UncertaintyBasis b) => b switch
    {
        UncertaintyBasis.LineSigmas => "line_sigmas",
        UncertaintyBasis.LineSigmasScaled => "line_sigmas_scaled_by_reduced_chi_squared",
        UncertaintyBasis.Scatter => "residual_scatter",
        _ => "none",
    };

    private static void Number(Utf8JsonWriter w, string name, double? v)
    {
        if (v is { } x && double.IsFinite(x)) w.WriteNumber(name, x);
        else w.WriteNull(name);
    }

    private static string Num(double? v) => v is { } x && double.IsFinite(x) ? x.ToString("R", CultureInfo.InvariantCulture) : "";
}
