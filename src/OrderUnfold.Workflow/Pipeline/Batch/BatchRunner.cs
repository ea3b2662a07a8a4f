using System.Collections.Concurrent;
using System.Diagnostics;
using System.Runtime.ExceptionServices;
using OrderUnfold.Calibration;
using OrderUnfold.Inversion;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>Settings of one batch run.</summary>
public sealed record BatchOptions
{
    /// <summary>Setup for rows without a <c>setup</c> column value (absolute, or relative to the working directory).</summary>
    public string? Setup { get; init; }

    /// <summary>Calibration file for rows without a <c>calibration</c> value; null: rows calibrate from their setup's calibration sweeps.</summary>
    public string? Calibration { get; init; }

    /// <summary>Items run at once (worker threads). Default 1.</summary>
    public int Jobs { get; init; } = 1;

    /// <summary>The share of the manifest this process runs. Default: all of it.</summary>
    public Shard Shard { get; init; } = Shard.All;

    /// <summary>Draws each item's PNG figures too (slow: off by default, null).</summary>
    public IFigureWriter? Figures { get; init; }

    /// <summary>
    /// Skip the off-grid line refinement for every item, whatever the setups say (about a fifth of the time per item for
    /// single-sweep items; no refined uncertainties or order checks). False: as each setup says.
    /// </summary>
    public bool NoRefine { get; init; }

    /// <summary>Run failed items again even when their inputs have not changed.</summary>
    public bool RetryFailed { get; init; }

    /// <summary>Tool version written into the reports and the item keys.</summary>
    public string ToolVersion { get; init; } = typeof(BatchRunner).Assembly.GetName().Version?.ToString(3) ?? "0.0.0";

    /// <summary>Per-item analysis for the summary's mode columns (the batch command passes its own; <see cref="NoItemAnalysis"/> leaves them empty).</summary>
    public IItemAnalysis Analysis { get; init; } = ModeItemAnalysis.Instance;
}

/// <summary>Counts so far, reported after each item.</summary>
/// <param name="Total">Rows of the manifest in this shard (counted before the run).</param>
/// <param name="Finished">Items finished in this run (ok, failed or skipped).</param>
/// <param name="Ok">Items ok (including skipped ones that were ok).</param>
/// <param name="Failed">Items failed (including skipped ones that had failed).</param>
/// <param name="Skipped">Items found finished by an earlier run.</param>
/// <param name="Elapsed">Time since the run started.</param>
/// <param name="LastId">The item that just finished.</param>
/// <param name="LastError">Its error, when it failed.</param>
/// <param name="LastSkipped">True when that item was found finished by an earlier run.</param>
public sealed record BatchProgress(long Total, long Finished, long Ok, long Failed, long Skipped, TimeSpan Elapsed, string LastId, string? LastError, bool LastSkipped)
{
    /// <summary>Items (run, not skipped) per second so far.</summary>
    public double ItemsPerSecond => Elapsed.TotalSeconds > 0 ? (Finished - Skipped) / Elapsed.TotalSeconds : 0;
}

/// <summary>What a batch run did.</summary>
/// <param name="Rows">Manifest rows in this shard.</param>
/// <param name="Ok">Items ok (including skipped ones).</param>
/// <param name="Failed">Items failed.</param>
/// <param name="Skipped">Items found finished by an earlier run and not run again.</param>
/// <param name="Complete">False when the run was cancelled before every row was finished.</param>
/// <param name="SummaryPath">The summary written (summary.csv, or the shard's summary).</param>
/// <param name="Elapsed">Wall-clock time of the run.</param>
public sealed record BatchResult(long Rows, long Ok, long Failed, long Skipped, bool Complete, string SummaryPath, TimeSpan Elapsed);

/// <summary>
/// Runs the unfold on every item of a manifest (see <see cref="Manifest"/>): streamed, in parallel, resumable,
/// shardable. Each item is written into a staging folder and renamed into <c>items/&lt;id&gt;/</c> once
/// complete, with <c>done.json</c> written last; an item whose key (inputs, setup text, calibration, settings,
/// tool version) matches a finished record is skipped. A failing item records its error and the run goes on.
/// When cancelled, items in flight stop unpublished (they run again on resume), no new item starts, and the summary of
/// what finished is written.
/// </summary>
public static class BatchRunner
{
    /// <summary>Runs the batch; throws <see cref="InputException"/> only for problems with the batch as a whole (manifest, defaults).
    /// A cancelled <paramref name="cancellationToken"/> stops the items in flight (each item's unfold receives the run's token)
    /// and starts no new one; the summary of what finished is still written.</summary>
    public static BatchResult Run(string manifestPath, string outDirectory, BatchOptions? options = null, IProgress<BatchProgress>? progress = null,
        CancellationToken cancellationToken = default)
    {
        options ??= new BatchOptions();
        var (context, total, manifestSha) = Prepare(manifestPath, outDirectory, options, cancellationToken);
        var clock = Stopwatch.StartNew();
        var counts = new Counts(total);
        var complete = RunItems(context, counts, clock, progress, cancellationToken);

        // the summary of what finished is written even when the run was stopped (its writers take no token)
        counts.Finished.Sort(ItemId.Order);
        var shard = options.Shard;
        var summary = BatchLayout.Summary(context.OutDir, shard);
        SummaryTable.Write(summary, BatchLayout.Items(context.OutDir), counts.Finished);
        new BatchStatus(shard, complete, manifestPath, manifestSha, context.Tool, total, counts.Ok, counts.Failed, counts.Skipped)
            .Write(BatchLayout.Status(context.OutDir, shard));
        BatchPublisher.TryDelete(context.Staging);
        var stagingParent = Path.GetDirectoryName(context.Staging)!;
        if (Directory.Exists(stagingParent) && !Directory.EnumerateFileSystemEntries(stagingParent).Any()) BatchPublisher.TryDelete(stagingParent); // no empty staging/ left
        return new BatchResult(total, counts.Ok, counts.Failed, counts.Skipped, complete, summary, clock.Elapsed);
    }

    /// <summary>Checks the settings, the default files and the manifest (header, rows of this shard, hash; streamed), then
    /// makes the output and staging folders.</summary>
    private static (BatchContext Context, long Total, string ManifestSha) Prepare(string manifestPath, string outDirectory, BatchOptions options,
        CancellationToken cancellationToken)
    {
        if (options.Jobs < 1) throw new InputException($"--jobs must be at least 1 but got {options.Jobs}");
        var manifest = Path.GetFullPath(manifestPath);
        var defaultSetup = options.Setup is null ? null : Path.GetFullPath(options.Setup);
        if (defaultSetup is not null && !File.Exists(defaultSetup)) throw new InputException($"setup file not found: {defaultSetup}", options.Setup);
        var defaultCalibration = options.Calibration is null ? null : Path.GetFullPath(options.Calibration);
        if (defaultCalibration is not null && !File.Exists(defaultCalibration)) throw new InputException($"calibration file not found: {defaultCalibration}", options.Calibration);
        var total = Manifest.Read(manifestPath, cancellationToken).LongCount(row => options.Shard.Contains(row.IdText));
        var manifestSha = ItemPlanner.Sha256OfFile(manifest);

        var outDir = Path.GetFullPath(outDirectory);
        Directory.CreateDirectory(BatchLayout.Items(outDir));
        var staging = Path.Combine(outDir, BatchLayout.StagingFolder, options.Shard.Tag);
        if (Directory.Exists(staging)) Directory.Delete(staging, recursive: true); // leftovers of an interrupted run of this shard
        Directory.CreateDirectory(staging);
        return (new BatchContext(options, manifest, defaultSetup, defaultCalibration, outDir, staging), total, manifestSha);
    }

    /// <summary>What has finished so far (guarded by locking the instance).</summary>
    private sealed class Counts(long total)
    {
        public long Total { get; } = total;
        public List<string> Finished { get; } = [];
        public long Ok { get; set; }
        public long Failed { get; set; }
        public long Skipped { get; set; }
    }

    /// <summary>The manifest rows of this shard, a repeated id turned into a problem row.</summary>
    private static IEnumerable<ManifestRow> ShardRows(string manifestPath, Shard shard, CancellationToken cancellationToken)
    {
        var firstLine = new Dictionary<string, long>(StringComparer.Ordinal);
        foreach (var row in Manifest.Read(manifestPath, cancellationToken))
        {
            if (!shard.Contains(row.IdText)) continue;
            if (row.IdAccepted && !firstLine.TryAdd(row.IdText, row.Line))
            {
                yield return row with { IdAccepted = false, Problem = $"duplicate id \"{row.IdText}\" (first used on line {firstLine[row.IdText]}); ids must be unique" };
                continue;
            }

            yield return row;
        }
    }

    /// <summary>Runs the shard's rows in parallel and publishes them; false when the run was stopped before every row finished.
    /// A failure of the output folder itself (disk full, permissions) is rethrown.</summary>
    private static bool RunItems(BatchContext context, Counts counts, Stopwatch clock, IProgress<BatchProgress>? progress, CancellationToken cancellationToken)
    {
        var options = context.Options;
        // stopped by the caller or by a failure to publish; the items' reading, solving and refining loops check it
        using var stop = CancellationTokenSource.CreateLinkedTokenSource(cancellationToken);
        var publisher = new BatchPublisher(context.Staging, 4 * options.Jobs + 4, stop);
        var complete = true;
        try
        {
            Parallel.ForEach(
                Partitioner.Create(ShardRows(context.Manifest, options.Shard, stop.Token), EnumerablePartitionerOptions.NoBuffering),
                new ParallelOptions { MaxDegreeOfParallelism = options.Jobs, CancellationToken = stop.Token },
                row =>
                {
                    var report = Count(counts, Process(row, context, publisher, stop.Token), clock);
                    progress?.Report(report);
                });
        }
        catch (AggregateException e) when (e.InnerExceptions.Count == 1 && e.InnerException is IOException or UnauthorizedAccessException)
        {
            // the output folder itself failed (disk full, permissions): nothing more can be written
            ExceptionDispatchInfo.Capture(e.InnerException!).Throw();
        }
        catch (OperationCanceledException) when (stop.IsCancellationRequested)
        {
            complete = false;
        }
        catch (AggregateException e) when (stop.IsCancellationRequested && e.Flatten().InnerExceptions.All(i => i is OperationCanceledException))
        {
            complete = false;
        }
        finally
        {
            publisher.Finish(); // items handed over are published before the summary is written
        }

        // the output folder itself failed while publishing (disk full, permissions): nothing more can be written
        if (publisher.Failure is not null) ExceptionDispatchInfo.Capture(publisher.Failure).Throw();
        return complete;
    }

    /// <summary>Counts a finished item; returns the progress report.</summary>
    private static BatchProgress Count(Counts counts, (ItemRecord Record, bool Skipped) item, Stopwatch clock)
    {
        lock (counts)
        {
            counts.Finished.Add(item.Record.Id);
            if (item.Record.Status == ItemStatus.Ok) counts.Ok++;
            else counts.Failed++;
            if (item.Skipped) counts.Skipped++;
            return new BatchProgress(counts.Total, counts.Finished.Count, counts.Ok, counts.Failed, counts.Skipped, clock.Elapsed, item.Record.Id,
                item.Record.Error, item.Skipped);
        }
    }

    /// <summary>Runs (or skips) one row; never throws for a problem of the item itself. A run item is handed to
    /// <paramref name="publisher"/>.</summary>
    private static (ItemRecord Record, bool Skipped) Process(ManifestRow row, BatchContext ctx, BatchPublisher publisher, CancellationToken cancellationToken)
    {
        var clock = Stopwatch.StartNew();
        var folder = row.Folder;
        var target = BatchLayout.Item(ctx.OutDir, folder);
        ItemPlanner.ItemPlan plan;
        try
        {
            plan = ItemPlanner.Make(row, ctx, ctx.Manifest);
        }
        catch (Exception e) when (e is InputException or IOException or UnauthorizedAccessException)
        {
            plan = new ItemPlanner.ItemPlan(null, null, ItemPlanner.Key(ctx, folder, row.Timestamp, ["plan-error " + e.Message]), Message(e));
        }

        var existing = ItemRecord.TryRead(Path.Combine(target, BatchLayout.DoneFile));
        // a failure from bad input is kept until the inputs change (or --retry-failed); an internal error runs again
        if (existing is not null && existing.Key == plan.Key &&
            (existing.Status == ItemStatus.Ok || (!ctx.Options.RetryFailed && !IsInternalError(existing.Error))))
            return (existing, true);

        var stage = Path.Combine(ctx.Staging, folder);
        if (Directory.Exists(stage)) Directory.Delete(stage, recursive: true);
        Directory.CreateDirectory(stage);
        var baseRecord = new ItemRecord { Id = folder, Key = plan.Key, Status = ItemStatus.Failed, ManifestLine = row.Line, Timestamp = row.Timestamp };
        var record = plan.Error is not null ? baseRecord with { Error = plan.Error } : Unfold(plan, ctx, stage, baseRecord, cancellationToken);
        record = record with { Seconds = clock.Elapsed.TotalSeconds };
        record.Write(Path.Combine(stage, BatchLayout.DoneFile), staged: true);
        publisher.Add(stage, target);
        return (record, false);
    }

    /// <summary>Unfolds one planned item into <paramref name="stage"/>; its record (failed, with the error, when the unfold failed).</summary>
    private static ItemRecord Unfold(ItemPlanner.ItemPlan plan, BatchContext ctx, string stage, ItemRecord baseRecord, CancellationToken cancellationToken)
    {
        try
        {
            var run = UnfoldPipeline.Run(plan.Setup!, null, plan.Calibration, cancellationToken);
            UnfoldOutputs.Write(run, stage, ctx.Options.Figures, ctx.Options.ToolVersion, staged: true);
            var analysis = ctx.Analysis.Analyse(run);
            var first = run.Result.Sweeps.Count > 0 ? run.Result.Sweeps[0] : null;
            var fsr = run.Sweeps.Count > 0 ? run.Sweeps[0].Instrument.FsrHz : (double?)null;
            // the record's values come from the run itself (not from report.json read back)
            return baseRecord with
            {
                Status = ItemStatus.Ok,
                Lines = run.Result.Lines.Count,
                StrongestLineHz = first is not null && fsr is double p && run.Result.Lines.Count > 0 ? SweepOperator.PositiveMod(-first.OffsetHz, p) : null,
                FrameFsrHz = fsr,
                OrdersResolved = run.Result.OrdersResolved,
                ReducedChi2 = run.Result.ReducedChiSquare,
                Warnings = run.AllWarnings.Count(),
                Analysis = analysis,
            };
        }
        catch (Exception e) when (e is OperationCanceledException && cancellationToken.IsCancellationRequested)
        {
            // stopped by Ctrl-C or SIGTERM: the item is dropped unpublished and runs again on resume
            Directory.Delete(stage, recursive: true);
            throw;
        }
        catch (Exception e) when (e is not OutOfMemoryException)
        {
            // whatever was written for this item is dropped: a failed item holds only its record
            Directory.Delete(stage, recursive: true);
            Directory.CreateDirectory(stage);
            return baseRecord with { Error = Message(e) };
        }
    }

    private const string InternalErrorPrefix = "internal error (";

    private static string Message(Exception e) => e switch
    {
        InputException ie => ie.Located,
        IOException or UnauthorizedAccessException => e.Message,
        _ => $"{InternalErrorPrefix}{e.GetType().Name}): {InputLimits.Clip(e.Message, 300)}",
    };

    private static bool IsInternalError(string? error) => error is not null && error.StartsWith(InternalErrorPrefix, StringComparison.Ordinal);
}

/// <summary>Everything an item needs from the run: settings, resolved defaults, caches.</summary>
internal sealed class BatchContext(BatchOptions options, string manifest, string? setup, string? calibration, string outDir, string staging)
{
    public BatchOptions Options { get; } = options;

    /// <summary>The manifest's full path.</summary>
    public string Manifest { get; } = manifest;

    public string ManifestDir { get; } = Path.GetDirectoryName(manifest)!;
    public string? DefaultSetup { get; } = setup;
    public string? DefaultCalibration { get; } = calibration;
    public string OutDir { get; } = outDir;
    public string Staging { get; } = staging;
    public IItemAnalysis Analysis { get; } = options.Analysis;

    /// <summary>Tool version plus the library's build id: a rebuilt library with other code re-runs finished items.</summary>
    public string Tool { get; } = $"{options.ToolVersion}+{typeof(BatchRunner).Assembly.ManifestModule.ModuleVersionId:N}";

    public ConcurrentDictionary<string, Lazy<(Setup Setup, string Sha)>> Setups { get; } = new(StringComparer.Ordinal);
    public ConcurrentDictionary<string, Lazy<(CalibrationSet Set, string Sha)>> Calibrations { get; } = new(StringComparer.Ordinal);
}
