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
/// <remarks><see cref="NamesAbove"/>: the line right above the header when it has the data's field count and some text
/// (exports with two header lines, names then units); column names may come from either line.</remarks>
internal sealed record DataLayout(char Delimiter, bool DecimalComma, int FieldCount, int FirstDataLine, string[]? Header, int? HeaderLine,
    string[]? NamesAbove = null);

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

    private static readonly HashSet<string>.AlternateLookup<ReadOnlySpan<char>> NonFiniteLookup = NonFiniteWords.GetAlternateLookup<ReadOnlySpan<char>>();

    /// <summary>Splits text into rows: one record per line, RFC 4180 quotes, whitespace trimmed. Text without quotes and
    /// without a lone carriage return is split directly (same rows as CsvHelper gives it, several times faster);
    /// anything else goes through CsvHelper.</summary>
    public static IEnumerable<TextRow> Rows(string text, char delimiter) =>
        IsPlain(text) ? PlainRows(text, delimiter) : CsvRows(text, delimiter);

    private static bool HasLoneCarriageReturn(string text)
    {
        for (var i = text.IndexOf('\r'); i >= 0; i = text.IndexOf('\r', i + 1))
            if (i + 1 >= text.Length || text[i + 1] != '\n') return true;
        return false;
    }

    /// <summary>Rows of text without quotes: lines end at '\n' (a preceding '\r' is dropped), fields at the delimiter.</summary>
    internal static IEnumerable<TextRow> PlainRows(string text, char delimiter)
    {
        var row = new CellRow(text);
        foreach (var (line, start, end) in LineBounds(text))
        {
            row.Split(line, start, end, delimiter);
            yield return row.ToTextRow();
        }
    }

    /// <summary>Line number (from 1), start and end (without the line break) of each line: lines end at '\n', and a
    /// '\r' before it is dropped.</summary>
    private static IEnumerable<(int Line, int Start, int End)> LineBounds(string text)
    {
        var line = 0;
        var pos = 0;
        while (pos < text.Length)
        {
            line++;
            var end = text.IndexOf('\n', pos);
            var next = end < 0 ? text.Length : end + 1;
            if (end < 0) end = text.Length;
            if (end > pos && text[end - 1] == '\r') end--;
            yield return (line, pos, end);
            pos = next;
        }
    }

    /// <summary>
    /// The rows of <see cref="Rows"/> as cells to read numbers from, without a string per cell for quote-free text: the one
    /// <see cref="CellRow"/> returned is reused for every row (read it before moving on).
    /// </summary>
    internal static IEnumerable<CellRow> CellRows(string text, char delimiter)
    {
        var row = new CellRow(text);
        if (!IsPlain(text))
        {
            foreach (var r in CsvRows(text, delimiter))
            {
                row.Set(r);
                yield return row;
            }

            yield break;
        }

        foreach (var (line, start, end) in LineBounds(text))
        {
            row.Split(line, start, end, delimiter);
            yield return row;
        }
    }

    /// <summary>One row's cells (trimmed), trailing empty cells dropped, as spans of the text or of a split row.</summary>
    internal sealed class CellRow(string text)
    {
        private readonly List<(int Start, int Length)> _cells = [];
        private string[]? _fields;

        public int Line { get; private set; }

        /// <summary>Cells without the trailing empty ones (0: a blank row).</summary>
        public int Count { get; private set; }

        public bool IsBlank => Count == 0;

        public ReadOnlySpan<char> Cell(int i) => _fields is not null ? _fields[i] : text.AsSpan(_cells[i].Start, _cells[i].Length);

        public string CellText(int i) => Cell(i).ToString();

        /// <summary>The row with its cells as strings.</summary>
        public TextRow ToTextRow()
        {
            var fields = new string[Count];
            for (var i = 0; i < fields.Length; i++) fields[i] = CellText(i);
            return new TextRow(Line, fields);
        }

        internal void Set(TextRow row)
        {
            _fields = row.Fields;
            Line = row.Line;
            Count = row.Fields.Length;
        }

        internal void Split(int line, int start, int end, char delimiter)
        {
            _fields = null;
            _cells.Clear();
            Line = line;
            Count = 0;
            var pos = start;
            while (true)
            {
                var cut = text.IndexOf(delimiter, pos, end - pos);
                var stop = cut < 0 ? end : cut;
                var cell = text.AsSpan(pos, stop - pos);
                var lead = cell.Length - cell.TrimStart().Length;
                var trimmed = cell.Trim();
                _cells.Add((pos + lead, trimmed.Length));
                if (trimmed.Length > 0) Count = _cells.Count;
                if (cut < 0) break;
                pos = cut + 1;
            }
        }
    }

    /// <summary>Rows by CsvHelper (quoted fields, odd line ends).</summary>
    internal static IEnumerable<TextRow> CsvRows(string text, char delimiter)
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
    public static CellKind Classify(string cell, bool decimalComma, out double value) => Classify(cell.AsSpan(), decimalComma, out value);

    /// <inheritdoc cref="Classify(string, bool, out double)"/>
    public static CellKind Classify(ReadOnlySpan<char> cell, bool decimalComma, out double value)
    {
        value = double.NaN;
        var s = cell.Trim();
        if (s.IsEmpty) return CellKind.Empty;

        var word = s.Length > 1 && (s[0] == '+' || s[0] == '-') ? s[1..] : s;
        if (IsNonFiniteWord(word))
        {
            value = word[0] is 'n' or 'N' ? double.NaN : s[0] == '-' ? double.NegativeInfinity : double.PositiveInfinity;
            return CellKind.NonFinite;
        }

        bool parsed;
        if (decimalComma)
        {
            if (s.Contains('.')) return CellKind.Text;
            Span<char> buffer = s.Length <= 128 ? stackalloc char[s.Length] : new char[s.Length];
            s.CopyTo(buffer);
            buffer.Replace(',', '.');
            parsed = double.TryParse(buffer, NumberStyles.Float, CultureInfo.InvariantCulture, out value);
        }
        else
        {
            if (s.Contains(',')) return CellKind.Text;
            parsed = double.TryParse(s, NumberStyles.Float, CultureInfo.InvariantCulture, out value);
        }

        if (!parsed) return CellKind.Text;
        return double.IsFinite(value) ? CellKind.Finite : CellKind.NonFinite;
    }

    /// <summary>A not-a-number or infinity word (sign removed). Every such word starts with n, i, ∞ or "1.#", so numbers
    /// skip the look-up.</summary>
    private static bool IsNonFiniteWord(ReadOnlySpan<char> word)
    {
        var c0 = word[0];
        var maybe = c0 is 'n' or 'N' or 'i' or 'I' or '∞' || (c0 == '1' && word.Length > 2 && word[1] == '.' && word[2] == '#');
        return maybe && NonFiniteLookup.Contains(word);
    }

    /// <summary>
    /// True when <see cref="Classify(ReadOnlySpan{char}, bool, out double)"/> would say Finite or NonFinite: the same
    /// decision without computing the value. Numbers follow the grammar double.TryParse accepts with
    /// NumberStyles.Float (sign, digits with at most one decimal mark, at least one digit, optional exponent).
    /// </summary>
    public static bool IsNumberCell(ReadOnlySpan<char> cell, bool decimalComma)
    {
        var s = cell.Trim();
        if (s.IsEmpty) return false;
        var word = s.Length > 1 && (s[0] == '+' || s[0] == '-') ? s[1..] : s;
        if (IsNonFiniteWord(word)) return true;
        var mark = decimalComma ? ',' : '.';
        var i = 0;
        if (s[i] is '+' or '-') i++;
        var digits = 0;
        while (i < s.Length && char.IsAsciiDigit(s[i])) { i++; digits++; }
        if (i < s.Length && s[i] == mark)
        {
            i++;
            while (i < s.Length && char.IsAsciiDigit(s[i])) { i++; digits++; }
        }

        if (digits == 0) return false;
        if (i < s.Length && s[i] is 'e' or 'E')
        {
            i++;
            if (i < s.Length && s[i] is '+' or '-') i++;
            var exponent = 0;
            while (i < s.Length && char.IsAsciiDigit(s[i])) { i++; exponent++; }
            if (exponent == 0) return false;
        }

        // .NET's parser allows trailing white space (space, tab to carriage return) and then trailing NUL characters
        while (i < s.Length && (s[i] == ' ' || (s[i] >= '\t' && s[i] <= '\r'))) i++;
        while (i < s.Length && s[i] == '\0') i++;
        return i == s.Length;
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
    public static DataLayout Detect(string head, char? delimiter, bool? decimalComma, bool? hasHeader, string file) =>
        Detect(head, delimiter, decimalComma, hasHeader, file, alwaysCsvHelper: false);

    /// <summary><see cref="Detect(string, char?, bool?, bool?, string)"/>; with <paramref name="alwaysCsvHelper"/> quote-free
    /// text is split by CsvHelper too (for tests that both ways agree).</summary>
    internal static DataLayout Detect(string head, char? delimiter, bool? decimalComma, bool? hasHeader, string file, bool alwaysCsvHelper)
    {
        Candidate? best = null;
        var delimiters = delimiter is char d0 ? [d0] : Delimiters;
        // quote-free text is looked at line by line without splitting it into strings; other text goes through CsvHelper
        var plain = !alwaysCsvHelper && IsPlain(head) ? PlainLines.Of(head) : null;
        foreach (var d in delimiters)
        {
            RowSource rows = plain is not null ? new PlainSource(plain, d) : new ListSource(CsvRows(head, d).ToList());
            bool[] marks = decimalComma is bool dc0 ? [dc0] : [false, true];
            foreach (var dc in marks)
            {
                var c = Evaluate(rows, d, dc);
                if (c is not null && (best is null || Better(c, best))) best = c;
            }
        }

        if (best is null) throw NoData(head, file);

        var (header, headerLine, firstLine) = FindHeader(best, hasHeader);
        return new DataLayout(best.Delimiter, best.DecimalComma, best.FieldCount, firstLine, header, headerLine,
            headerLine is int hl ? NamesAbove(best, hl) : null);
    }

    private static bool IsPlain(string text) => !text.Contains('"') && !HasLoneCarriageReturn(text);

    /// <summary>Start and end (without the line break) of each line of a text.</summary>
    private sealed class PlainLines
    {
        private PlainLines(string text, List<int> starts, List<int> ends)
        {
            Text = text;
            Starts = starts.ToArray();
            Ends = ends.ToArray();
        }

        public string Text { get; }
        public int[] Starts { get; }
        public int[] Ends { get; }

        public static PlainLines Of(string text)
        {
            var starts = new List<int>();
            var ends = new List<int>();
            foreach (var (_, start, end) in LineBounds(text))
            {
                starts.Add(start);
                ends.Add(end);
            }

            return new PlainLines(text, starts, ends);
        }
    }

    /// <summary>Rows as layout detection needs them: field counts and number-row tests, and whole rows on demand.</summary>
    private abstract class RowSource
    {
        public abstract int Count { get; }

        /// <summary>Fields without the trailing empty ones (0: a blank row).</summary>
        public abstract int FieldCount(int i);

        public abstract bool IsNumberRow(int i, bool decimalComma);

        public abstract TextRow Row(int i);
    }

    private sealed class ListSource(List<TextRow> rows) : RowSource
    {
        public override int Count => rows.Count;
        public override int FieldCount(int i) => rows[i].Fields.Length;
        public override bool IsNumberRow(int i, bool decimalComma) => DelimitedText.IsNumberRow(rows[i], decimalComma);
        public override TextRow Row(int i) => rows[i];
    }

    /// <summary>Quote-free lines split at the delimiter on demand (the same fields as <see cref="PlainRows"/>).</summary>
    private sealed class PlainSource : RowSource
    {
        private readonly PlainLines _lines;
        private readonly char _delimiter;
        private readonly int[] _fieldCounts;
        private readonly CellRow _row;

        public PlainSource(PlainLines lines, char delimiter)
        {
            _lines = lines;
            _delimiter = delimiter;
            _fieldCounts = new int[lines.Starts.Length];
            Array.Fill(_fieldCounts, -1);
            _row = new CellRow(lines.Text);
        }

        public override int Count => _fieldCounts.Length;

        private CellRow Split(int i)
        {
            _row.Split(i + 1, _lines.Starts[i], _lines.Ends[i], _delimiter);
            _fieldCounts[i] = _row.Count;
            return _row;
        }

        public override int FieldCount(int i) => _fieldCounts[i] >= 0 ? _fieldCounts[i] : Split(i).Count;

        public override bool IsNumberRow(int i, bool decimalComma)
        {
            var row = Split(i);
            var any = false;
            for (var c = 0; c < row.Count; c++)
            {
                var cell = row.Cell(c);
                if (IsNumberCell(cell, decimalComma)) any = true;
                else if (!cell.IsEmpty) return false;
            }

            return any;
        }

        public override TextRow Row(int i) => Split(i).ToTextRow();
    }

    private sealed class Run(int start, int fieldCount)
    {
        public int Start { get; } = start;
        public int FieldCount { get; } = fieldCount;
        public int Length { get; set; } = 1;
    }

    private sealed record Candidate(char Delimiter, bool DecimalComma, RowSource Rows, int FieldCount, int StartIndex, int Score);

    private static bool Better(Candidate a, Candidate b)
    {
        if (a.Score != b.Score) return a.Score > b.Score;
        if (a.FieldCount != b.FieldCount) return a.FieldCount > b.FieldCount;
        if (a.DecimalComma != b.DecimalComma) return !a.DecimalComma;
        return Array.IndexOf(Delimiters, a.Delimiter) < Array.IndexOf(Delimiters, b.Delimiter);
    }

    private static Candidate? Evaluate(RowSource rows, char delimiter, bool decimalComma)
    {
        var runs = new List<Run>();
        Run? current = null;
        for (int i = 0; i < rows.Count; i++)
        {
            var fields = rows.FieldCount(i);
            if (fields == 0) continue;
            if (!rows.IsNumberRow(i, decimalComma))
            {
                current = null;
                continue;
            }
            if (current is not null && current.FieldCount == fields) current.Length++;
            else runs.Add(current = new Run(i, fields));
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
            if (IsNumberCell(f, decimalComma)) any = true;
            else if (f.Length > 0) return false; // fields are trimmed
        }
        return any;
    }

    private static bool HasText(TextRow row, bool decimalComma) =>
        row.Fields.Any(f => Classify(f, decimalComma, out _) == CellKind.Text);

    private static (string[]? Header, int? HeaderLine, int FirstDataLine) FindHeader(Candidate c, bool? hasHeader)
    {
        var start = c.Rows.Row(c.StartIndex);
        if (hasHeader == false) return (null, null, start.Line);

        // Nearest row above the data that holds text; rows of numbers, NaN or blanks in between are skipped. A comment
        // line ('#…') between the header and the data does not hide the header; it is the header only when no other is found.
        (string[] Fields, int Line)? comment = null;
        for (int i = c.StartIndex - 1; i >= 0; i--)
        {
            var row = c.Rows.Row(i);
            if (row.IsBlank || !HasText(row, c.DecimalComma)) continue;
            bool looksLikeHeader = row.Fields.Length == c.FieldCount &&
                                   row.Fields.All(f => Classify(f, c.DecimalComma, out _) is CellKind.Text or CellKind.Empty);
            if (row.Fields[0].TrimStart().StartsWith('#'))
            {
                if (comment is null && (hasHeader == true || looksLikeHeader)) comment = (row.Fields, row.Line);
                continue;
            }

            if (hasHeader == true || looksLikeHeader) return (row.Fields, row.Line, start.Line);
            break;
        }

        if (comment is { } h) return (h.Fields, h.Line, start.Line);

        // Told there is a header but nothing above the numbers: the first number row is the header.
        if (hasHeader == true && !AnyTextAbove(c)) return (start.Fields, start.Line, start.Line + 1);
        return (null, null, start.Line);
    }

    /// <summary>The row on the line right above the header line, when it has the data's field count and holds text.</summary>
    private static string[]? NamesAbove(Candidate c, int headerLine)
    {
        var index = headerLine - 2; // rows are one per line: line k is row k - 1
        if (index < 0 || index >= c.Rows.Count) return null;
        var row = c.Rows.Row(index);
        if (row.Line != headerLine - 1 || row.Fields.Length != c.FieldCount || !HasText(row, c.DecimalComma)) return null;
        return row.Fields;
    }

    private static bool AnyTextAbove(Candidate c)
    {
        for (int i = c.StartIndex - 1; i >= 0; i--)
            if (!c.Rows.Row(i).IsBlank && HasText(c.Rows.Row(i), c.DecimalComma)) return true;
        return false;
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
