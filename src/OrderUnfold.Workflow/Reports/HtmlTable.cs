using System.Globalization;
using System.Text;
using static System.Net.WebUtility;

namespace OrderUnfold.Reports;

/// <summary>One cell of an <see cref="HtmlTable"/>: the text people read and, for numbers, the value the table sorts by
/// (written as <c>data-value</c>, in full precision, the same value as the CSV files hold).</summary>
/// <param name="Text">What the cell shows (escaped when written).</param>
/// <param name="Value">The number behind the text, or null for text cells and missing values.</param>
/// <param name="Tone">A class that colours the cell (e.g. <c>bad</c>, <c>warn</c>, <c>good</c>), or null.</param>
public sealed record HtmlCell(string Text, double? Value = null, string? Tone = null)
{
    /// <summary>A text cell.</summary>
    public static implicit operator HtmlCell(string text) => new(text);
}

/// <summary>A table of a report page: a caption, column headers (units in the header), rows of cells. Sortable by the
/// page's small script when scripts run; a plain table without it.</summary>
public sealed record HtmlTable(string Caption, IReadOnlyList<string> Headers, IReadOnlyList<IReadOnlyList<HtmlCell>> Rows)
{
    /// <summary>Text cells up to this many characters are kept on one line (ids, time stamps, names).</summary>
    private const int ShortText = 32;

    /// <summary>What the table says when it has no rows.</summary>
    public string Empty { get; init; } = "none";

    /// <summary>An id for the table element (tests and links find it by this), or null.</summary>
    public string? Id { get; init; }

    /// <summary>Writes the table as HTML (well-formed XML as well: every element closed, text escaped).</summary>
    public void WriteTo(StringBuilder html)
    {
        if (Rows.Count == 0)
        {
            html.Append("<p class=\"empty\">").Append(HtmlEncode(Caption)).Append(": ").Append(HtmlEncode(Empty)).Append("</p>\n");
            return;
        }

        var id = Id is null ? "" : $" id=\"{HtmlEncode(Id)}\"";
        html.Append("<div class=\"scroll\"><table class=\"sortable\"").Append(id).Append("><caption>").Append(HtmlEncode(Caption)).Append("</caption>\n<thead><tr>");
        foreach (var h in Headers) html.Append("<th scope=\"col\">").Append(HtmlEncode(h)).Append("</th>");
        html.Append("</tr></thead>\n<tbody>\n");
        foreach (var row in Rows)
        {
            html.Append("<tr>");
            foreach (var cell in row) WriteCell(html, cell);
            html.Append("</tr>\n");
        }

        html.Append("</tbody></table></div>\n");
    }

    private static void WriteCell(StringBuilder html, HtmlCell cell)
    {
        var classes = new List<string>();
        if (cell.Value is not null) classes.Add("num");
        else if (cell.Text.Length <= ShortText) classes.Add("short");
        if (cell.Tone is not null) classes.Add(cell.Tone);
        html.Append("<td");
        if (classes.Count > 0) html.Append(" class=\"").Append(string.Join(' ', classes)).Append('"');
        if (cell.Value is double v && double.IsFinite(v))
            html.Append(" data-value=\"").Append(v.ToString("R", CultureInfo.InvariantCulture)).Append('"');
        html.Append('>').Append(HtmlEncode(cell.Text)).Append("</td>");
    }
}
