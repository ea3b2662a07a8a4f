using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using OrderUnfold.Pipeline.Batch;

namespace OrderUnfold.Reports;

/// <summary>report.html of a batch (or of a merge of its shards): the counts and the failed items first, then the summary
/// table (summary.csv, failed rows first), the tracks of the lines over time, the manifest and the tool version. Each
/// item's folder holds its own unfold report.html.</summary>
public static class BatchHtml
{
    /// <summary>Writes report.html into the batch folder <paramref name="directory"/> (which holds summary.csv and
    /// batch.json); <paramref name="figures"/> null draws no track. Returns its path.</summary>
    public static string Write(string directory, IFigureWriter? figures, string? toolVersion)
    {
        var summaryPath = Path.Combine(directory, BatchLayout.SummaryFile);
        var statusPath = BatchLayout.Status(directory, Shard.All);
        var status = File.Exists(statusPath) ? BatchStatus.Read(statusPath) : null;
        var table = CsvTable.ReadText(InputLimits.ReadAllText(summaryPath, "summary"));
        var (header, rows) = table;
        var statusColumn = Array.IndexOf(header, "status");
        var errorColumn = Array.IndexOf(header, "error");
        var failed = rows.Where(r => statusColumn >= 0 && r[statusColumn] != "ok").ToList();
        var page = new HtmlPage("Batch report", directory);
        page.Section("verdicts", "Counts and failures").Facts(Counts(status, rows.Count, failed.Count))
            .Messages("Failed items", failed.Select(r => $"{r[0]}: {(errorColumn >= 0 ? r[errorColumn] : "failed")}"), "refusals", "No item failed.");
        page.Section("summary", "Summary").Table(CsvHtml.Table("Items, failed ones first (summary.csv; each item's folder under items/ holds its report.html)", table,
            (_, all) => all.OrderBy(r => statusColumn >= 0 && r[statusColumn] == "ok" ? 1 : 0), maxRows: 2000));
        page.Section("tracks", "Lines over time").Figures(figures is null ? null : Tracks(directory, figures, page));
        page.Section("inputs", "Inputs").Table(EvidenceHtml.InputTable(status is null ? [] : HtmlPage.Describe(("manifest", status.Manifest))));
        page.Section("version", "Tool").Facts([("tool", "orderunfold"), ("version", toolVersion ?? "unknown"), ("build of the items", status?.Tool)]);
        return page.Write(directory, toolVersion, HtmlPage.Now());
    }

    private static IEnumerable<(string, string?)> Counts(BatchStatus? status, int rows, int failed)
    {
        yield return ("items in summary.csv", $"{rows} ({rows - failed} ok, {failed} failed)");
        if (status is null) yield break;
        yield return ("manifest rows", status.Rows.ToString(System.Globalization.CultureInfo.InvariantCulture));
        yield return ("run", status.Complete ? "complete" : "interrupted: the summary lists only the items finished; run the batch again to resume");
        yield return ("found finished from an earlier run", status.Skipped.ToString(System.Globalization.CultureInfo.InvariantCulture));
        yield return ("manifest SHA-256", status.ManifestSha256);
    }

    /// <summary>The track figures, or none (with the reason on the page) when the batch has nothing to track.</summary>
    private static IReadOnlyList<SvgFigure> Tracks(string directory, IFigureWriter figures, HtmlPage page)
    {
        try
        {
            return LineTracker.Svg(directory, figures);
        }
        catch (InputException e)
        {
            page.Paragraph($"No track: {e.Message}", "quiet");
            return [];
        }
    }
}
