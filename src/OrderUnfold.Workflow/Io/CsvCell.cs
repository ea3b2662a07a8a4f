using System.Globalization;

namespace OrderUnfold.Io;

/// <summary>
/// Text cells of the CSV files the tool writes, made safe to open in a spreadsheet: a cell that begins with
/// '=', '+', '-', '@', a tab or a carriage return and is not a number gets a leading apostrophe, so it is shown as
/// text and never run as a formula (the OWASP guidance on CSV injection). Numbers, including negative ones and
/// exponents, stay numbers.
/// </summary>
public static class CsvCell
{
    /// <summary>The cell text with the formula guard applied (no CSV quoting).</summary>
    public static string Guard(string? text)
    {
        if (string.IsNullOrEmpty(text)) return text ?? "";
        if (text[0] is not ('=' or '+' or '-' or '@' or '\t' or '\r')) return text;
        if (double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out _)) return text;
        return "'" + text;
    }

    /// <summary>The guarded cell, quoted when it holds a comma, a quote, a line break or leading/trailing space.</summary>
    public static string Text(string? text)
    {
        var v = Guard(text);
        if (v.Length == 0) return v;
        var needs = v.IndexOfAny([',', '"', '\n', '\r']) >= 0 || v[0] == ' ' || v[^1] == ' ';
        return needs ? "\"" + v.Replace("\"", "\"\"") + "\"" : v;
    }
}
