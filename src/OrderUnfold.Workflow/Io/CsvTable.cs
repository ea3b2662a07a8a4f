using System.Globalization;
using System.Text;
using CsvHelper;

namespace OrderUnfold.Io;

/// <summary>
/// The tables the tool writes and reads back (summary.csv, plan.csv, the track files): one typed row per record.
/// A row type is a CsvHelper <c>[CsvRecord]</c> whose members name their columns (<c>[CsvColumn]</c>) and their cell
/// formats (<c>[CsvConverter]</c>: <see cref="NumberCell"/>, <see cref="TextCell"/>, ...); CsvHelper generates one mapper
/// for reading and one for writing from that declaration at compile time, so the writer and the reader of a file
/// share its columns. Invariant culture, comma separated, "\n" line ends, UTF-8 without a byte-order mark, one
/// record per line. Files are written atomically (<see cref="AtomicFile"/>).
/// </summary>
public static class CsvTable
{
    /// <summary>How every table is written.</summary>
    public static CsvWriterOptions WriterOptions { get; } = CsvWriterOptions.Default with
    {
        NewLine = "\n",
        Quoting = CsvQuoting.WhenNeededOrWhitespace,
        TrueValue = "true",
        FalseValue = "false",
        FormatProvider = CultureInfo.InvariantCulture,
    };

    private static CsvReaderOptions ReaderOptions => CsvReaderOptions.Default with
    {
        Separator = ',',
        TrackLineNumbers = true,
        TrimWhitespace = true,
        FieldCountMismatch = CsvFieldCountHandling.Throw,
        MalformedData = CsvMalformedDataHandling.Throw,
        AllowLineBreaksInQuotes = false,
        FormatProvider = CultureInfo.InvariantCulture,
        MaxRecordSize = (int)Math.Min(int.MaxValue, 4L * InputLimits.Current.MaxLineChars),
    };

    /// <summary>The header of <typeparamref name="T"/>'s table, as written (no line break).</summary>
    public static string HeaderOf<T>()
    {
        using var text = new StringWriter(CultureInfo.InvariantCulture);
        using (var csv = CsvWriter.Create(text, WriterOptions, leaveOpen: true)) csv.WriteHeader<T>();
        return text.ToString().TrimEnd('\n');
    }

    /// <summary>Opens a writer of a table on <paramref name="stream"/> (UTF-8, no byte-order mark); the stream stays open.</summary>
    public static CsvWriter OpenWriter(Stream stream) => CsvWriter.Create(stream, WriterOptions, leaveOpen: true);

    /// <summary>Writes the header and the rows (streamed) into <paramref name="path"/> atomically.</summary>
    public static void WriteFile<T>(string path, IEnumerable<T> rows)
    {
        AtomicFile.Write(path, stream =>
        {
            using var csv = OpenWriter(stream);
            csv.WriteHeader<T>();
            foreach (var row in rows) csv.WriteRecord(row);
        });
    }

    /// <summary>The table as text: header and rows, written by <paramref name="write"/> (given a writer whose output is returned).</summary>
    public static string ToText(Action<CsvWriter> write)
    {
        using var stream = new MemoryStream();
        using (var csv = OpenWriter(stream)) write(csv);
        return new UTF8Encoding(false).GetString(stream.ToArray());
    }

    /// <summary>
    /// Streams the rows of the table at <paramref name="path"/>. The header must be exactly the one
    /// <typeparamref name="T"/> writes (<paramref name="what"/> names the table in the message when it is not); a cell
    /// that does not read as its column's type, a row with too few or too many cells, or a broken quote is an
    /// <see cref="InputException"/> naming the file, line and column and what was expected there.
    /// </summary>
    public static IEnumerable<T> Read<T>(string path, string what, CancellationToken cancellationToken = default)
    {
        CheckTable(path, what);
        return ReadRows<T>(path, what, HeaderOf<T>().Split(','), cancellationToken);
    }

    /// <summary>
    /// <see cref="InputLimits.CheckFile"/> without the size limit: the tables are the tool's own outputs and are streamed
    /// record by record (each record bounded by the line-length limit), so a summary of millions of items is read
    /// whatever its size; folders, devices, FIFOs and sockets are still refused.
    /// </summary>
    private static void CheckTable(string path, string what)
    {
        using var unlimited = InputLimits.Use(InputLimits.Current with { MaxFileBytes = long.MaxValue });
        InputLimits.CheckFile(path, what);
    }

    /// <summary>
    /// Streams rows of <typeparamref name="T"/> from a table that may hold other columns too, in any order (each column
    /// <typeparamref name="T"/> reads must be there): for files written by other parts of the tool.
    /// </summary>
    public static IEnumerable<T> ReadColumns<T>(string path, string what, CancellationToken cancellationToken = default)
    {
        CheckTable(path, what);
        return ReadRows<T>(path, what, null, cancellationToken);
    }

    /// <summary>The header and the rows of a table's text as they stand (every cell as text, quotes removed), for
    /// showing a table the tool wrote; read with the same options as <see cref="Read{T}"/>.</summary>
    public static (string[] Header, List<string[]> Rows) ReadText(string text)
    {
        using var csv = CsvReader.FromText(text, ReaderOptions);
        var header = csv.Headers.ToArray();
        var rows = new List<string[]>();
        while (csv.Read())
        {
            var row = new string[csv.FieldCount];
            for (var i = 0; i < row.Length; i++) row[i] = csv[i].ToString();
            rows.Add(row);
        }

        return (header, rows);
    }

    /// <summary>Opens a reader of a table after <see cref="InputLimits.CheckFile"/> (for tables read with hand-made mappers).</summary>
    public static CsvReader OpenReader(string path, string what)
    {
        CheckTable(path, what);
        return CsvReader.FromFile(path, ReaderOptions);
    }

    private static IEnumerable<T> ReadRows<T>(string path, string what, string[]? exactHeader, CancellationToken cancellationToken)
    {
        using var csv = CsvReader.FromFile(path, ReaderOptions);
        var header = Located(path, () => csv.Headers.ToArray());
        if (header.Length == 0) throw new InputException($"the {what} is empty; expected the header \"{HeaderOf<T>()}\"", path, 1);
        if (exactHeader is not null) CheckHeader(path, header, exactHeader, what);
        CsvRecordMapper<T> mapper;
        try
        {
            mapper = Located(path, () => CsvRecordMapper.Create<T>(csv));
        }
        catch (KeyNotFoundException e)
        {
            throw new InputException($"the {what} lacks a column: {e.Message}", path, 1);
        }

        while (Located(path, csv.Read))
        {
            cancellationToken.ThrowIfCancellationRequested();
            yield return Located(path, () => csv.GetRecord(mapper), header);
        }
    }

    /// <summary>Runs a step of CsvHelper and turns its complaint into an <see cref="InputException"/> with the place.</summary>
    public static TResult Located<TResult>(string path, Func<TResult> step, IReadOnlyList<string>? header = null)
    {
        try
        {
            return step();
        }
        catch (CsvFormatException e)
        {
            int? line = e.LineNumber > 0 ? (int)Math.Min(int.MaxValue, e.LineNumber) : null;
            int? column = e.FieldIndex >= 0 ? e.FieldIndex + 1 : null;
            var cause = e.InnerException is { } inner ? inner.Message : e.Message;
            var name = header is not null && e.FieldIndex >= 0 && e.FieldIndex < header.Count ? $" ({header[e.FieldIndex]})" : "";
            throw new InputException(column is null ? cause : $"column {column}{name}: {cause}", path, line, column, e);
        }
    }

    private static void CheckHeader(string path, string[] header, string[] expected, string what)
    {
        for (var i = 0; i < Math.Max(header.Length, expected.Length); i++)
        {
            if (i < header.Length && i < expected.Length && header[i] == expected[i]) continue;
            var got = i < header.Length ? $"\"{InputException.Clip(header[i])}\"" : "missing";
            throw new InputException(
                $"not a {what}: column {i + 1} of the header is {got} but expected \"{(i < expected.Length ? expected[i] : "")}\" (the header must be \"{string.Join(",", expected)}\")",
                path, 1, i + 1);
        }
    }
}
