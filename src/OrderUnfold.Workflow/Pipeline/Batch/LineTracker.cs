using OrderUnfold.Io;
namespace OrderUnfold.Pipeline.Batch;

/// <summary>Which frame the tracked frequencies are given in.</summary>
public enum TrackFrame
{
    /// <summary>
    /// The first sweep's calibrated scan axis: each item's lines are placed at (frequency relative to the strongest
    /// line) + (the strongest line's scan position, <c>strongest_line_hz</c>), unwrapped from item to item. With one
    /// shared calibration and a stable cavity, laser drift and mode hops show as real movements. Default.
    /// </summary>
    Scan,

    /// <summary>Frequencies relative to each item's strongest line, as in lines.csv: drift of the spacings only; hops cannot be seen.</summary>
    Anchor,
}

/// <summary>Settings of <see cref="LineTracker"/>.</summary>
public sealed record TrackOptions
{
    /// <summary>Lines of consecutive items closer than this (or 3× the larger frequency σ, when that is more) belong to one track. Default 20 MHz.</summary>
    public double ToleranceHz { get; init; } = 20e6;

    public TrackFrame Frame { get; init; } = TrackFrame.Scan;

    /// <summary>A track missing from more than this many consecutive items is closed. Default 10.</summary>
    public int MaxGap { get; init; } = 10;

    /// <summary>Draws track.png and smsr.png; null: no figures.</summary>
    public IFigureWriter? Figures { get; init; }
}

/// <summary>What <see cref="LineTracker.Run"/> found and wrote.</summary>
public sealed record TrackResult(IReadOnlyList<SeriesPoint> Series, IReadOnlyList<TrackSummary> Tracks, IReadOnlyList<ModeHop> Hops,
    IReadOnlyList<string> Files, IReadOnlyList<string> Warnings, DateTimeOffset? Origin)
{
    /// <summary>All points, in time order (also written to track.csv).</summary>
    public IReadOnlyList<TrackPoint> Points { get; init; } = [];
}

/// <summary>
/// Follows lines through a time-ordered batch: reads summary.csv (ids, status, time stamps), each finished item's
/// done.json and lines.csv, links lines of consecutive items by nearest frequency within a tolerance (greedy,
/// closest pairs first), fits each track's drift, and flags a mode hop whenever the strongest line changes track.
/// Writes track.csv, tracks.csv, hops.csv, series.csv (<see cref="TrackFiles"/>) and (optionally) track.png and smsr.png.
/// </summary>
/// <remarks>Holds one small record per item and per line in memory (for ordering by time and for the plots).</remarks>
public static class LineTracker
{
    /// <summary>Tracks the batch in <paramref name="batchDirectory"/> and writes into <paramref name="outDirectory"/> (default: DIR/track);
    /// a cancelled <paramref name="cancellationToken"/> stops it while it reads the summary or the items.</summary>
    public static TrackResult Run(string batchDirectory, string? outDirectory = null, TrackOptions? options = null, CancellationToken cancellationToken = default)
    {
        options ??= new TrackOptions();
        if (!(options.ToleranceHz > 0)) throw new InputException($"the tolerance must be a positive frequency but got {options.ToleranceHz} Hz");
        var dir = Path.GetFullPath(batchDirectory);
        var summaryPath = Path.Combine(dir, BatchLayout.SummaryFile);
        if (!File.Exists(summaryPath))
            throw new InputException(Directory.Exists(Path.Combine(dir, BatchLayout.ShardsFolder))
                ? $"no summary.csv in {dir}: this batch ran in shards; run '{Hint.Command("merge " + Hint.Quote(dir))}' first"
                : $"no summary.csv in {dir}: expected the output folder of '{Hint.Command("batch")}'", dir);
        var outDir = Path.GetFullPath(outDirectory ?? Path.Combine(dir, "track"));
        var warnings = new List<string>();
        var (items, origin) = TimedItems(summaryPath, warnings, cancellationToken);
        var follower = new TrackFollower(dir, options, origin, warnings);
        for (var k = 0; k < items.Count; k++)
        {
            cancellationToken.ThrowIfCancellationRequested();
            follower.Add(k, items[k]);
        }

        if (follower.Series.Count == 0) throw new InputException($"no finished item to track in {summaryPath}", summaryPath);
        var summaries = follower.Summaries();
        var files = TrackFiles.Write(outDir, follower.Points, summaries, follower.Hops, follower.Series);
        if (options.Figures is { } figures) files.AddRange(Draw(figures, outDir, origin, follower.Series, follower.Points, summaries, follower.Hops, options, warnings));
        return new TrackResult(follower.Series, summaries, follower.Hops, files, warnings, origin) { Points = follower.Points };
    }

    /// <summary>The summary's finished items in time order (id order, one unit apart, when none has a time stamp), and the
    /// time origin.</summary>
    private static (List<TimedItem> Items, DateTimeOffset? Origin) TimedItems(string summaryPath, List<string> warnings, CancellationToken cancellationToken)
    {
        var rows = new List<(SummaryRow Row, DateTimeOffset? When)>();
        var failed = 0;
        foreach (var r in SummaryTable.Read(summaryPath, cancellationToken))
        {
            if (r.Status != ItemStatus.Ok)
            {
                failed++;
                continue;
            }

            rows.Add((r, r.Timestamp is string t && Manifest.TryParseTimestamp(t, out var w) ? w : null));
        }

        if (failed > 0) warnings.Add($"{failed} failed item(s) left out");
        var timed = rows.Count(r => r.When is not null);
        if (timed == 0)
        {
            warnings.Add("no item has a time stamp: items are taken in id order, one time unit (\"s\") per item");
            return (rows.Select((r, i) => Item(r.Row, i)).ToList(), null);
        }

        if (timed < rows.Count) warnings.Add($"{rows.Count - timed} item(s) without a time stamp left out");
        var origin = rows.Where(r => r.When is not null).Min(r => r.When!.Value);
        var items = rows.Where(r => r.When is not null)
            .Select(r => Item(r.Row, (r.When!.Value - origin).TotalSeconds))
            .OrderBy(r => r.TimeS).ThenBy(r => r.Id, ItemId.Order).ToList();
        return (items, origin);
    }

    private static TimedItem Item(SummaryRow row, double t) => new(row.Id, row.Timestamp, t, row.SmsrDb, row.ModeSpacingHz);

    /// <summary>track.png and (when any item has an SMSR) smsr.png; returns their paths.</summary>
    private static List<string> Draw(IFigureWriter figures, string outDir, DateTimeOffset? origin, List<SeriesPoint> series, List<TrackPoint> points,
        List<TrackSummary> tracks, List<ModeHop> hops, TrackOptions options, List<string> warnings)
    {
        var files = new List<string>();
        var hopTimes = hops.Select(h => h.TimeS).ToArray();
        var frameText = options.Frame == TrackFrame.Scan
            ? "frequency on the scan axis, relative to the first item's strongest line"
            : "frequency relative to each item's strongest line";
        var trackPng = Path.Combine(outDir, "track.png");
        figures.WriteTrack(trackPng, new TrackPlotInput(
            $"Lines over time ({series.Count} items, {tracks.Count} tracks, {hops.Count} mode hop{(hops.Count == 1 ? "" : "s")})",
            frameText, points.Select(p => p.TimeS).ToArray(), points.Select(p => p.FrequencyHz).ToArray(),
            points.Select(p => p.Intensity > 0 ? 10 * Math.Log10(p.Intensity) : double.NaN).ToArray(), hopTimes, origin));
        files.Add(trackPng);
        var smsr = series.Where(s => s.SmsrDb is not null).ToList();
        if (smsr.Count > 0)
        {
            var smsrPng = Path.Combine(outDir, "smsr.png");
            var source = smsr.All(s => s.SmsrFromSummary) ? "from the mode analysis" : smsr.Any(s => s.SmsrFromSummary) ? "mode analysis where given, else strongest ÷ second-strongest line" : "strongest ÷ second-strongest line";
            figures.WriteSeries(smsrPng, new SeriesPlotInput("Side-mode suppression over time", source, "SMSR (dB)",
                smsr.Select(s => s.TimeS).ToArray(), smsr.Select(s => s.SmsrDb!.Value).ToArray(), hopTimes, origin));
            files.Add(smsrPng);
        }
        else
        {
            warnings.Add("no item has two or more lines or an smsr_db value: smsr.png not drawn");
        }

        return files;
    }
}
