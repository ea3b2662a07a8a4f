using System.Globalization;
using System.Text;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>One row of summary.csv, as read back.</summary>
public sealed record SummaryRow(string Id, ItemStatus Status, string? Timestamp, int? Lines, double? StrongestLineHz, double? ModeSpacingHz,
    double? SmsrDb, double? ReducedChiSquare, int Warnings, double? Seconds, string? Error);

/// <summary>
/// summary.csv: one row per item, sorted by id (ordinal), written from the items' done.json records. Columns:
/// <c>id, status, timestamp, lines, strongest_line_hz, mode_spacing_hz, smsr_db, reduced_chi2, warnings, seconds, error</c>.
/// Every column but <c>seconds</c> (wall-clock timing) is a function of the inputs, settings and tool version alone.
/// </summary>
public static class SummaryTable
{
    public const string ModeSpacingColumn = "mode_spacing_hz";
    public const string SmsrColumn = "smsr_db";

    /// <summary>Index of the timing column (0-based), the one column that differs between identical runs.</summary>
    public const int SecondsColumnIndex = 9;

    /// <summary>The header line.</summary>
    public static string Header { get; } = string.Join(",",
        "id", "status", "timestamp", "lines", "strongest_line_hz", ModeSpacingColumn, SmsrColumn, "reduced_chi2", "warnings", "seconds", "error");

    /// <summary>The summary line of one record (no line break).</summary>
    public static string Line(ItemRecord r)
    {
        var c = CultureInfo.InvariantCulture;
        var sb = new StringBuilder(128);
        sb.Append(r.Id).Append(',')
          .Append(r.Status.ToString().ToLowerInvariant()).Append(',')
          .Append(CsvLine.Quote(r.Timestamp)).Append(',')
          .Append(r.Lines?.ToString(c)).Append(',')
          .Append(ItemRecord.F(r.StrongestLineHz)).Append(',')
          .Append(CsvLine.Quote(r.Analysis.GetValueOrDefault(ModeSpacingColumn))).Append(',')
          .Append(CsvLine.Quote(r.Analysis.GetValueOrDefault(SmsrColumn))).Append(',')
          .Append(ItemRecord.F(r.ReducedChiSquare)).Append(',')
          .Append(r.Warnings.ToString(c)).Append(',')
          .Append(r.Seconds.ToString("F3", c)).Append(',')
          .Append(CsvLine.Quote(r.Error));
        return sb.ToString();
    }

    /// <summary>
    /// Writes summary.csv atomically from the records of <paramref name="sortedIds"/> (already in ordinal order)
    /// under <paramref name="itemsDirectory"/>, one record at a time. Ids without a readable record are left out
    /// and counted in the return value.
    /// </summary>
    public static int Write(string path, string itemsDirectory, IEnumerable<string> sortedIds)
    {
        var missing = 0;
        AtomicFile.Write(path, stream =>
        {
            using var w = new StreamWriter(stream, new UTF8Encoding(false), 1 << 16, leaveOpen: true) { NewLine = "\n" };
            w.WriteLine(Header);
            foreach (var id in sortedIds)
            {
                var r = ItemRecord.TryRead(Path.Combine(itemsDirectory, id, BatchLayout.DoneFile));
                if (r is null)
                {
                    missing++;
                    continue;
                }

                w.WriteLine(Line(r));
            }
        });
        return missing;
    }

    /// <summary>Streams the rows of a summary.csv (InputException when it is not one).</summary>
    public static IEnumerable<SummaryRow> Read(string path)
    {
        if (!File.Exists(path)) throw new InputException($"summary not found: {Path.GetFullPath(path)}", path);
        var n = 0;
        foreach (var line in File.ReadLines(path))
        {
            n++;
            if (n == 1)
            {
                if (line.TrimStart('\uFEFF') != Header) throw new InputException($"not a batch summary: expected the header \"{Header}\"", path, 1);
                continue;
            }

            if (line.Length == 0) continue;
            if (!CsvLine.TrySplit(line, out var f, out var error) || f.Count != 11)
                throw new InputException(error ?? $"expected 11 fields but got {f.Count}", path, n);
            yield return new SummaryRow(f[0],
                Enum.TryParse<ItemStatus>(f[1], true, out var s) ? s : throw new InputException($"status: expected ok or failed but got \"{f[1]}\"", path, n, 2),
                Empty(f[2]), Int(f[3]), Num(f[4]), Num(f[5]), Num(f[6]), Num(f[7]), Int(f[8]) ?? 0, Num(f[9]), Empty(f[10]));
        }

        if (n == 0) throw new InputException("the summary is empty (no header)", path);
    }

    /// <summary>The id of a summary line (ids never need quoting).</summary>
    public static string IdOf(string line)
    {
        var comma = line.IndexOf(',');
        return comma < 0 ? line : line[..comma];
    }

    /// <summary>The line with the timing column emptied (for comparing runs).</summary>
    public static string WithoutTiming(string line)
    {
        if (!CsvLine.TrySplit(line, out var f, out _) || f.Count <= SecondsColumnIndex) return line;
        f[SecondsColumnIndex] = "";
        return CsvLine.Join(f);
    }

    private static string? Empty(string s) => s.Length == 0 ? null : s;

    private static double? Num(string s) => double.TryParse(s, NumberStyles.Float, CultureInfo.InvariantCulture, out var v) ? v : null;

    private static int? Int(string s) => int.TryParse(s, NumberStyles.Integer, CultureInfo.InvariantCulture, out var v) ? v : null;
}
