using System.Globalization;
using OrderUnfold.Analysis;
using OrderUnfold.Outputs;

namespace OrderUnfold.Reports;

/// <summary>Table cells of the report pages, formatted for people (units chosen by size, a dash for a missing value),
/// each holding the number behind it for sorting.</summary>
public static class Cells
{
    /// <summary>What a missing value shows.</summary>
    public const string Missing = "—";

    /// <summary>A frequency with <paramref name="significant"/> digits and its unit (kHz, MHz, GHz…).</summary>
    public static HtmlCell Frequency(double? hz, int significant = 7) =>
        hz is double v && double.IsFinite(v) ? new HtmlCell(Quantity.FormatFrequency(v, significant), v) : new HtmlCell(Missing);

    /// <summary>A plain number in <paramref name="format"/> (invariant culture).</summary>
    public static HtmlCell Number(double? value, string format = "G4") =>
        value is double v && double.IsFinite(v) ? new HtmlCell(v.ToString(format, CultureInfo.InvariantCulture), v) : new HtmlCell(Missing);

    /// <summary>A whole number.</summary>
    public static HtmlCell Count(long? value) =>
        value is long v ? new HtmlCell(v.ToString(CultureInfo.InvariantCulture), v) : new HtmlCell(Missing);

    /// <summary>A length with its unit.</summary>
    public static HtmlCell Length(double? m) =>
        m is double v && double.IsFinite(v) ? new HtmlCell(Quantity.FormatLength(v), v) : new HtmlCell(Missing);

    /// <summary>Yes or no.</summary>
    public static HtmlCell YesNo(bool value, string? toneWhenNo = null) => new(value ? "yes" : "no", Tone: value ? null : toneWhenNo);

    /// <summary>An order verdict in the outputs' wording, coloured: secure green, doubtful amber.</summary>
    public static HtmlCell Verdict(OrderVerdict verdict) => new(OutputJson.Name(verdict), Tone: verdict switch
    {
        OrderVerdict.Secure => "good",
        OrderVerdict.Doubtful => "warn",
        _ => null,
    });

    /// <summary>A frequency as text for a fact list, or null when missing (the fact is then left out).</summary>
    public static string? FrequencyText(double? hz, int significant = 7) =>
        hz is double v && double.IsFinite(v) ? Quantity.FormatFrequency(v, significant) : null;

    /// <summary>A number as text for a fact list, or null when missing.</summary>
    public static string? NumberText(double? value, string format = "G4") =>
        value is double v && double.IsFinite(v) ? v.ToString(format, CultureInfo.InvariantCulture) : null;
}
