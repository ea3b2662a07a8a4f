using System.Globalization;
using CsvHelper;

namespace OrderUnfold.Io;

/// <summary>What one text cell holds, for layout detection and reading.</summary>
internal enum CellKind
{
    /// <summary>Nothing (or only whitespace).</summary>
    Empty,

    /// <summary>A finite number.</summary>
    Finite,

    /// <summary>A not-a-number or infinity marker ("NaN", "nan", "-inf", "Infinity", "1.#QNAN").</summary>
    NonFinite,

    /// <summary>Anything else (names, units, numbers with the wrong decimal mark).</summary>
    Text,
}

/// <summary>One line of a delimited file: its 1-based line number and its fields, trimmed, without trailing empty fields.</summary>
internal readonly record struct TextRow(int Line, string[] Fields)
{
    /// <summary>True when the line holds no value at all (empty, whitespace or only delimiters).</summary>
    public bool IsBlank => Fields.Length == 0;
}

/// <summary>
/// Where the numbers are in a delimited export: delimiter, decimal mark, field count of the data rows, the
/// line the data block starts at, and the header row when there is one.
/// </summary>
internal sealed record DataLayout(char Delimiter, bool DecimalComma, int FieldCount, int FirstDataLine, string[]? Header, int? HeaderLine);

/// <summary>
/// Field splitting (CsvHelper), number recognition and layout detection for oscilloscope and DAQ exports:
/// settings lines before the data, an optional header, comma/semicolon/tab delimiters and decimal commas.
/// </summary>
internal static class DelimitedText
{
    /// <summary>Delimiters tried, in order of preference on a tie.</summary>
    public static readonly char[] Delimiters = [',', ';', '\t'];

    /// <summary>Rows of a run shorter than this before the longest run are taken for settings lines, not data.</summary>
    private const int MinLeadingRun = 3;

    /// <summary>Layout detection looks at this many lines from the start of the file.</summary>
    public const int SampleLines = 5000;

    private static readonly HashSet<string> NonFiniteWords = new(StringComparer.OrdinalIgnoreCase)
    {
        "nan", "nan(ind)", "inf", "infinity", "∞", "1.#inf", "1.#qnan", "1.#snan", "1.#ind",
    };

    /// <summary>Splits text into rows with CsvHelper: one record per line, RFC 4180 quotes, whitespace trimmed.</summary>
    public static IEnumerable<TextRow> Rows(string text, char delimiter)
    {
        var options = CsvReaderOptions.Default with
        {
            Separator = delimiter,
            HasHeader = false,
            SkipEmptyLines = false,
            TrackLineNumbers = true,
            TrimWhitespace = true,
            WhitespaceCharacters = delimiter == '\t' ? " " : " \t",
            AllowLineBreaksInQuotes = false,
            DetectSeparatorHint = false,
            MalformedData = CsvMalformedDataHandling.Recover,
        };
        using var reader = CsvReader.FromText(text, options);
        while (reader.Read())
        {
            int count = reader.FieldCount;
            var fields = new string[count];
            for (int i = 0; i < count; i++) fields[i] = (reader.GetString(i) ?? "").Trim();
            while (count > 0 && fields[count - 1].Length == 0) count--;
            if (count < fields.Length) Array.Resize(ref fields, count);
            yield return new TextRow(checked((int)reader.LineNumber), fields);
        }
    }

    /// <summary>
    /// Classifies one cell and parses it. With <paramref name="decimalComma"/> the decimal mark is ',' and a '.'
    /// makes the cell text; without it a ',' makes the cell text (no thousands separators either way).
    /// </summary>
    public static CellKind Classify(string cell, bool decimalComma, out double value)
    {
        value = double.NaN;
        var s = cell.AsSpan().Trim();
        if (s.IsEmpty) return CellKind.Empty;

        var word = s.Length > 1 && (s[0] == '+' || s[0] == '-') ? s[1..] : s;
        if (NonFiniteWords.Contains(word.ToString()))
        {
            value = word[0] is 'n' or 'N' ? double.NaN : s[0] == '-' ? double.NegativeInfinity : double.PositiveInfinity;
            return CellKind.NonFinite;
        }

        string text;
        if (decimalComma)
        {
            if (s.Contains('.')) return CellKind.Text;
            text = s.ToString().Replace(',', '.');
        }
        else
        {
            if (s.Contains(',')) return CellKind.Text;
            text = s.ToString();
        }

        if (!double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out value)) return CellKind.Text;
        return double.IsFinite(value) ? CellKind.Finite : CellKind.NonFinite;
    }

    /// <summary>The first <paramref name="lines"/> lines of the text (all of it when shorter).</summary>
    public static string Head(string text, int lines)
    {
        int pos = 0;
        for (int i = 0; i < lines; i++)
        {
            int nl = text.IndexOf('\n', pos);
            if (nl < 0) return text;
            pos = nl + 1;
        }
        return text[..pos];
    }

    /// <summary>
    /// Finds delimiter, decimal mark, data block and header in the first lines of a file.
    /// <para>
    /// Per candidate (delimiter, decimal mark) the rows are split and the runs of "number rows" (every cell a
    /// number, NaN/inf or empty, at least one number; blank lines neither break nor extend a run) with one
    /// field count are found. The candidate with the longest run wins (ties: more fields, point before comma,
    /// then ',' ';' tab). The data block starts at the earliest run of at least three rows with the winning
    /// field count (so a bad cell in the data splits the block but does not hide its first part as settings),
    /// else at the longest run. The header is the nearest row above the data that holds text: it counts as a
    /// header when it has the data's field count and no number in it (or always, with <paramref name="hasHeader"/>).
    /// </para>
    /// </summary>
    public static DataLayout Detect(string head, char? delimiter, bool? decimalComma, bool? hasHeader, string file)
    {
        Candidate? best = null;
        var delimiters = delimiter is char d0 ? [d0] : Delimiters;
        foreach (var d in delimiters)
        {
            var rows = Rows(head, d).ToList();
            bool[] marks = decimalComma is bool dc0 ? [dc0] : [false, true];
            foreach (var dc in marks)
            {
                var c = Evaluate(rows, d, dc);
                if (c is not null && (best is null || Better(c, best))) best = c;
            }
        }

        if (best is null) throw NoData(head, file);

        var (header, headerLine, firstLine) = FindHeader(best, hasHeader);
        return new DataLayout(best.Delimiter, best.DecimalComma, best.FieldCount, firstLine, header, headerLine);
    }

    private sealed class Run(int start, int fieldCount)
    {
        public int Start { get; } = start;
        public int FieldCount { get; } = fieldCount;
        public int Length { get; set; } = 1;
    }

    private sealed record Candidate(char Delimiter, bool DecimalComma, List<TextRow> Rows, int FieldCount, int StartIndex, int Score);

    private static bool Better(Candidate a, Candidate b)
    {
        if (a.Score != b.Score) return a.Score > b.Score;
        if (a.FieldCount != b.FieldCount) return a.FieldCount > b.FieldCount;
        if (a.DecimalComma != b.DecimalComma) return !a.DecimalComma;
        return Array.IndexOf(Delimiters, a.Delimiter) < Array.IndexOf(Delimiters, b.Delimiter);
    }

    private static Candidate? Evaluate(List<TextRow> rows, char delimiter, bool decimalComma)
    {
        var runs = new List<Run>();
        Run? current = null;
        for (int i = 0; i < rows.Count; i++)
        {
            var row = rows[i];
            if (row.IsBlank) continue;
            if (!IsNumberRow(row, decimalComma))
            {
                current = null;
                continue;
            }
            if (current is not null && current.FieldCount == row.Fields.Length) current.Length++;
            else runs.Add(current = new Run(i, row.Fields.Length));
        }
        if (runs.Count == 0) return null;

        var longest = runs[0];
        foreach (var r in runs) if (r.Length > longest.Length) longest = r;
        var start = longest;
        foreach (var r in runs)
        {
            if (r.Start >= longest.Start) break;
            if (r.FieldCount == longest.FieldCount && r.Length >= MinLeadingRun)
            {
                start = r;
                break;
            }
        }
        return new Candidate(delimiter, decimalComma, rows, longest.FieldCount, start.Start, longest.Length);
    }

    private static bool IsNumberRow(TextRow row, bool decimalComma)
    {
        bool any = false;
        foreach (var f in row.Fields)
        {
            switch (Classify(f, decimalComma, out _))
            {
                case CellKind.Text: return false;
                case CellKind.Finite:
                case CellKind.NonFinite: any = true; break;
            }
        }
        return any;
    }

    private static bool HasText(TextRow row, bool decimalComma) =>
        row.Fields.Any(f => Classify(f, decimalComma, out _) == CellKind.Text);

    private static (string[]? Header, int? HeaderLine, int FirstDataLine) FindHeader(Candidate c, bool? hasHeader)
    {
        var start = c.Rows[c.StartIndex];
        if (hasHeader == false) return (null, null, start.Line);

        // Nearest row above the data that holds text; rows of numbers, NaN or blanks in between are skipped.
        for (int i = c.StartIndex - 1; i >= 0; i--)
        {
            var row = c.Rows[i];
            if (row.IsBlank || !HasText(row, c.DecimalComma)) continue;
            bool looksLikeHeader = row.Fields.Length == c.FieldCount &&
                                   row.Fields.All(f => Classify(f, c.DecimalComma, out _) is CellKind.Text or CellKind.Empty);
            if (hasHeader == true || looksLikeHeader) return (row.Fields, row.Line, start.Line);
            return (null, null, start.Line);
        }

        // Told there is a header but nothing above the numbers: the first number row is the header.
        if (hasHeader == true) return (start.Fields, start.Line, start.Line + 1);
        return (null, null, start.Line);
    }

    private static InputException NoData(string head, string file)
    {
        var lines = head.Split('\n');
        var nonBlank = Enumerable.Range(0, lines.Length).Where(i => lines[i].Trim().Length > 0).ToList();
        return nonBlank.Count == 1
            ? new InputException("the file holds only a header line and no rows of numbers", file, nonBlank[0] + 1)
            : new InputException(
                "no rows of numbers found (looked for comma, semicolon and tab separated columns, with decimal point or comma)",
                file);
    }
}
