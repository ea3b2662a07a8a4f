using System.Globalization;
using CsvHelper;

namespace OrderUnfold.Io;

/// <summary>
/// Text cells of the CSV files the tool writes, made safe to open in a spreadsheet: a cell that begins with
/// '=', '+', '-', '@', a tab or a carriage return and is not a number gets a leading apostrophe, so it is shown as
/// text and never run as a formula (the OWASP guidance on CSV injection). Numbers, including negative ones and
/// exponents, stay numbers. The guard is undone exactly by <see cref="Unguard"/> (text that already starts with
/// apostrophes before such a character gets one more), so a table read back gives the text that was written.
/// </summary>
public static class CsvCell
{
    /// <summary>The cell text with the formula guard applied (no CSV quoting).</summary>
    public static string Guard(string? text)
    {
        if (string.IsNullOrEmpty(text)) return text ?? "";
        return NeedsGuard(text) ? "'" + text : text;
    }

    /// <summary>The text a guarded cell stands for: the inverse of <see cref="Guard"/>.</summary>
    public static string Unguard(string cell) => cell.Length > 1 && cell[0] == '\'' && NeedsGuard(cell[1..]) ? cell[1..] : cell;

    /// <summary>The guarded cell, quoted when it holds a comma, a quote, a line break or leading/trailing space.</summary>
    public static string Text(string? text)
    {
        var v = Guard(text);
        if (v.Length == 0) return v;
        var needs = v.IndexOfAny([',', '"', '\n', '\r']) >= 0 || v[0] == ' ' || v[^1] == ' ';
        return needs ? "\"" + v.Replace("\"", "\"\"") + "\"" : v;
    }

    /// <summary>Whether a spreadsheet could take the text for a formula, or it would read as a guarded one.</summary>
    private static bool NeedsGuard(string text)
    {
        var rest = text.TrimStart('\'');
        if (rest.Length == 0 || rest[0] is not ('=' or '+' or '-' or '@' or '\t' or '\r')) return false;
        return !double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out _);
    }
}

/// <summary>
/// A free-text cell that may be empty (time stamps, messages, paths, labels): written on one line (line breaks become
/// spaces) with the formula guard of <see cref="CsvCell.Guard"/>; read back with the guard undone. An empty cell reads as null.
/// </summary>
public sealed class OptionalTextCell : ICsvConverter<string?>
{
    /// <inheritdoc />
    public string? Read(CsvReader reader, int index)
    {
        var cell = reader[index].ToString();
        return string.IsNullOrEmpty(cell) ? null : CsvCell.Unguard(cell);
    }

    /// <inheritdoc />
    public void Write(CsvWriter writer, string? value) => writer.WriteField(value is null ? "" : CsvCell.Guard(OneLine(value)));

    internal static string OneLine(string text) => text.Replace("\r\n", " ").Replace('\n', ' ').Replace('\r', ' ');
}

/// <summary>A free-text cell that is always there (ids): as <see cref="OptionalTextCell"/>, an empty cell reading as "".</summary>
public sealed class TextCell : ICsvConverter<string>
{
    /// <inheritdoc />
    public string Read(CsvReader reader, int index) => CsvCell.Unguard(reader[index].ToString() ?? "");

    /// <inheritdoc />
    public void Write(CsvWriter writer, string value) => writer.WriteField(CsvCell.Guard(OptionalTextCell.OneLine(value)));
}

/// <summary>A number cell: the shortest text that reads back to the same double (invariant culture); NaN and infinities are written empty.</summary>
public sealed class NumberCell : ICsvConverter<double>
{
    /// <inheritdoc />
    public double Read(CsvReader reader, int index) => ParseNumber(reader[index].ToString());

    /// <inheritdoc />
    public void Write(CsvWriter writer, double value)
    {
        if (double.IsFinite(value)) writer.WriteField(value.ToString("R", CultureInfo.InvariantCulture));
        else writer.WriteField("");
    }

    /// <summary>Reads an invariant-culture number; FormatException saying what was expected otherwise.</summary>
    internal static double ParseNumber(string? text) =>
        double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out var v)
            ? v
            : throw new FormatException($"expected a number with '.' as the decimal mark but got \"{InputException.Clip(text ?? "")}\"");
}

/// <summary>A number cell where an infinite value is written <c>inf</c> (e.g. an SNR that no noise level reaches).</summary>
public sealed class NumberOrInfinityCell : ICsvConverter<double>
{
    /// <inheritdoc />
    public double Read(CsvReader reader, int index)
    {
        var text = reader[index].ToString();
        return text == "inf" ? double.PositiveInfinity : NumberCell.ParseNumber(text);
    }

    /// <inheritdoc />
    public void Write(CsvWriter writer, double value)
    {
        if (double.IsPositiveInfinity(value)) writer.WriteField("inf");
        else new NumberCell().Write(writer, value);
    }
}

/// <summary>A duration in seconds with three decimals (timing columns, which differ from run to run anyway).</summary>
public sealed class MillisecondsCell : ICsvConverter<double>
{
    /// <inheritdoc />
    public double Read(CsvReader reader, int index) => NumberCell.ParseNumber(reader[index].ToString());

    /// <inheritdoc />
    public void Write(CsvWriter writer, double value) => writer.WriteField(value.ToString("F3", CultureInfo.InvariantCulture));
}

/// <summary>An enum cell in lower case (<c>ok</c>, <c>failed</c>); read ignoring case, naming the accepted values otherwise.</summary>
public sealed class LowerCaseCell<T> : ICsvConverter<T>
    where T : struct, Enum
{
    /// <inheritdoc />
    public T Read(CsvReader reader, int index)
    {
        var text = reader[index].ToString() ?? "";
        return text.Length > 0 && char.IsAsciiLetter(text[0]) && Enum.TryParse<T>(text, ignoreCase: true, out var value)
            ? value
            : throw new FormatException($"expected one of {string.Join(", ", Enum.GetNames<T>().Select(Lower))} but got \"{InputException.Clip(text)}\"");
    }

    /// <inheritdoc />
    public void Write(CsvWriter writer, T value) => writer.WriteField(Lower(value.ToString()));

    private static string Lower(string name) => name.ToLowerInvariant();
}

/// <summary>A whole-number cell (counts, track numbers, ranks), invariant culture; names what was expected otherwise.</summary>
public sealed class WholeNumberCell<T> : ICsvConverter<T>
    where T : struct, System.Numerics.IBinaryInteger<T>
{
    /// <inheritdoc />
    public T Read(CsvReader reader, int index)
    {
        var text = reader[index].ToString();
        return T.TryParse(text, NumberStyles.Integer, CultureInfo.InvariantCulture, out var v)
            ? v
            : throw new FormatException($"expected a whole number but got \"{InputException.Clip(text ?? "")}\"");
    }

    /// <inheritdoc />
    public void Write(CsvWriter writer, T value) => writer.WriteField(value.ToString(null, CultureInfo.InvariantCulture));
}

/// <summary>A yes/no cell written <c>true</c> or <c>false</c>; names what was expected otherwise.</summary>
public sealed class TrueFalseCell : ICsvConverter<bool>
{
    /// <inheritdoc />
    public bool Read(CsvReader reader, int index) => reader[index].ToString() switch
    {
        "true" => true,
        "false" => false,
        var text => throw new FormatException($"expected true or false but got \"{InputException.Clip(text ?? "")}\""),
    };

    /// <inheritdoc />
    public void Write(CsvWriter writer, bool value) => writer.WriteField(value ? "true" : "false");
}
