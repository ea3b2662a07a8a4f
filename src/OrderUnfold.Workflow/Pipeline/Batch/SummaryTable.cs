using System.Globalization;
using CsvHelper;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>
/// One row of summary.csv: written from an item's done.json record (<see cref="From"/>) and read back by merge and
/// track through the same columns. Every column but <c>seconds</c> (wall-clock timing) is a function of the inputs,
/// settings and tool version alone.
/// </summary>
[CsvRecord]
public sealed partial record SummaryRow
{
    /// <summary>Item id (its folder under items/).</summary>
    [CsvColumn("id"), CsvConverter(typeof(TextCell))]
    public string Id { get; init; } = "";

    /// <summary>ok or failed.</summary>
    [CsvColumn("status"), CsvConverter(typeof(LowerCaseCell<ItemStatus>))]
    public ItemStatus Status { get; init; }

    /// <summary>Normalised UTC time stamp from the manifest, or null.</summary>
    [CsvColumn("timestamp"), CsvConverter(typeof(OptionalTextCell))]
    public string? Timestamp { get; init; }

    /// <summary>Number of lines found.</summary>
    [CsvColumn("lines"), CsvConverter(typeof(WholeNumberCell<int>))]
    public int? Lines { get; init; }

    /// <summary>Strongest line's position on the first sweep's calibrated scan axis, modulo that cavity's FSR, Hz.</summary>
    [CsvColumn("strongest_line_hz"), CsvConverter(typeof(NumberCell))]
    public double? StrongestLineHz { get; init; }

    /// <summary>Laser mode spacing from the item analysis, Hz.</summary>
    [CsvColumn(SummaryTable.ModeSpacingColumn), CsvConverter(typeof(NumberCell))]
    public double? ModeSpacingHz { get; init; }

    /// <summary>Side-mode suppression from the item analysis, dB.</summary>
    [CsvColumn(SummaryTable.SmsrColumn), CsvConverter(typeof(NumberCell))]
    public double? SmsrDb { get; init; }

    /// <summary>Reduced χ² over all sweeps of the item.</summary>
    [CsvColumn("reduced_chi2"), CsvConverter(typeof(NumberCell))]
    public double? ReducedChi2 { get; init; }

    /// <summary>Number of warnings of the run.</summary>
    [CsvColumn("warnings"), CsvConverter(typeof(WholeNumberCell<int>))]
    public int Warnings { get; init; }

    /// <summary>Wall-clock seconds the item took (timing: differs from run to run).</summary>
    [CsvColumn("seconds"), CsvConverter(typeof(MillisecondsCell))]
    public double? Seconds { get; init; }

    /// <summary>Why the item failed, or null.</summary>
    [CsvColumn("error"), CsvConverter(typeof(OptionalTextCell))]
    public string? Error { get; init; }

    /// <summary>The summary row of a finished item's record.</summary>
    public static SummaryRow From(ItemRecord r) => new()
    {
        Id = r.Id,
        Status = r.Status,
        Timestamp = r.Timestamp,
        Lines = r.Lines,
        StrongestLineHz = r.StrongestLineHz,
        ModeSpacingHz = AnalysisNumber(r, SummaryTable.ModeSpacingColumn),
        SmsrDb = AnalysisNumber(r, SummaryTable.SmsrColumn),
        ReducedChi2 = r.ReducedChi2,
        Warnings = r.Warnings,
        Seconds = r.Seconds,
        Error = r.Error,
    };

    /// <summary>The row without its timing (for comparing runs).</summary>
    public SummaryRow WithoutTiming() => this with { Seconds = null };

    private static double? AnalysisNumber(ItemRecord r, string column) =>
        r.Analysis.TryGetValue(column, out var text) && double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out var v) ? v : null;
}

/// <summary>
/// summary.csv: one <see cref="SummaryRow"/> per item, sorted by id (<see cref="ItemId.Order"/>), written from the items'
/// done.json records. Columns: <c>id, status, timestamp, lines, strongest_line_hz, mode_spacing_hz, smsr_db,
/// reduced_chi2, warnings, seconds, error</c>. The values come from each item's run as recorded in done.json, not
/// from its report.json.
/// </summary>
public static class SummaryTable
{
    /// <summary>The summary column of the item analysis' mode spacing (Hz).</summary>
    public const string ModeSpacingColumn = "mode_spacing_hz";

    /// <summary>The summary column of the item analysis' side-mode suppression (dB).</summary>
    public const string SmsrColumn = "smsr_db";

    /// <summary>What the readers call the file in messages.</summary>
    private const string What = "batch summary";

    /// <summary>The header line.</summary>
    public static string Header { get; } = CsvTable.HeaderOf<SummaryRow>();

    /// <summary>
    /// Writes summary.csv atomically from the records of <paramref name="sortedIds"/> (already in ordinal order)
    /// under <paramref name="itemsDirectory"/>, one record at a time. Ids without a readable record are left out
    /// and counted in the return value.
    /// </summary>
    public static int Write(string path, string itemsDirectory, IEnumerable<string> sortedIds)
    {
        var missing = 0;
        IEnumerable<SummaryRow> Rows()
        {
            foreach (var id in sortedIds)
            {
                var r = ItemRecord.TryRead(Path.Combine(itemsDirectory, id, BatchLayout.DoneFile));
                if (r is null) missing++;
                else yield return SummaryRow.From(r);
            }
        }

        CsvTable.WriteFile(path, Rows());
        return missing;
    }

    /// <summary>Writes the rows as they come (for merging summaries already in order).</summary>
    public static void Write(string path, IEnumerable<SummaryRow> rows) => CsvTable.WriteFile(path, rows);

    /// <summary>Streams the rows of a summary.csv (InputException naming file, line and column when it is not one), checking
    /// <paramref name="cancellationToken"/> before each row.</summary>
    public static IEnumerable<SummaryRow> Read(string path, CancellationToken cancellationToken = default) =>
        CsvTable.Read<SummaryRow>(path, What, cancellationToken);
}
