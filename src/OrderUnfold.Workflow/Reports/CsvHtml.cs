using System.Globalization;
using OrderUnfold.Io;

namespace OrderUnfold.Reports;

/// <summary>
/// A CSV output (modes.csv, plan.csv, summary.csv) as a report table: the same rows and columns, numbers formatted for
/// people by the unit their column name ends with (<c>_hz</c> as a frequency with its unit, <c>_m</c> as a length,
/// <c>_db</c> and <c>_s</c> in the header), the full value kept for sorting.
/// </summary>
public static class CsvHtml
{
    /// <summary>The table of <paramref name="csv"/>; with <paramref name="order"/> the rows are reordered (it receives the
    /// header and the rows); at most <paramref name="maxRows"/> rows are shown, and the caption says so when more exist.</summary>
    public static HtmlTable Table(string caption, string csv, Func<string[], IEnumerable<string[]>, IEnumerable<string[]>>? order = null,
        int maxRows = 500) => Table(caption, CsvTable.ReadText(csv), order, maxRows);

    /// <summary>The table of a CSV text already read (<see cref="CsvTable.ReadText"/>); see the overload that reads it.</summary>
    public static HtmlTable Table(string caption, (string[] Header, List<string[]> Rows) table,
        Func<string[], IEnumerable<string[]>, IEnumerable<string[]>>? order = null, int maxRows = 500)
    {
        var (header, rows) = table;
        var ordered = (order is null ? rows : order(header, rows)).ToList();
        var shown = ordered.Take(maxRows).Select(r => (IReadOnlyList<HtmlCell>)header.Select((h, i) => Cell(h, i < r.Length ? r[i] : "")).ToList()).ToList();
        var note = ordered.Count > maxRows ? $" (the first {maxRows} of {ordered.Count} rows; the CSV file holds them all)" : "";
        return new HtmlTable(caption + note, header.Select(Header).ToList(), shown);
    }

    /// <summary>A column name for people: words instead of underscores, the unit in brackets where the cells do not show it.</summary>
    public static string Header(string name) => name switch
    {
        _ when name.EndsWith("_hz", StringComparison.Ordinal) => Words(name[..^3]),
        _ when name.EndsWith("_m", StringComparison.Ordinal) => Words(name[..^2]),
        _ when name.EndsWith("_db", StringComparison.Ordinal) => Words(name[..^3]) + " (dB)",
        _ when name.EndsWith("_s", StringComparison.Ordinal) => Words(name[..^2]) + " (s)",
        _ => Words(name),
    };

    private static string Words(string name) => name.Replace('_', ' ');

    private static HtmlCell Cell(string column, string text)
    {
        if (!double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out var v) || !double.IsFinite(v)) return new HtmlCell(text);
        if (text.Length > 1 && text[0] == '0' && char.IsAsciiDigit(text[1])) return new HtmlCell(text, v); // an id such as 0042 stays as written
        if (column.EndsWith("_hz", StringComparison.Ordinal)) return Cells.Frequency(v);
        if (column.EndsWith("_m", StringComparison.Ordinal)) return Cells.Length(v);
        return new HtmlCell(Math.Abs(v) >= 1e6 || (v != 0 && Math.Abs(v) < 1e-3) ? v.ToString("G4", CultureInfo.InvariantCulture)
            : Math.Round(v, 4).ToString(CultureInfo.InvariantCulture), v);
    }
}
