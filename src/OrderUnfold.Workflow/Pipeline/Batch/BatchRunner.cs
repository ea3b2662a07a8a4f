using System.Collections.Concurrent;
using System.Diagnostics;
using System.Security.Cryptography;
using System.Text;
using OrderUnfold.Calibration;
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
    /// <summary>At most this many parsed setups and calibrations are kept (a manifest may name millions).</summary>
    private const int CacheLimit = 64;

    /// <summary>Runs the batch; throws <see cref="InputException"/> only for problems with the batch as a whole (manifest, defaults).</summary>
    public static BatchResult Run(string manifestPath, string outDirectory, BatchOptions? options = null, IProgress<BatchProgress>? progress = null,
        CancellationToken cancel = default)
    {
        options ??= new BatchOptions();
        if (options.Jobs < 1) throw new InputException($"--jobs must be at least 1 but got {options.Jobs}");
        var manifest = Path.GetFullPath(manifestPath);
        var manifestDir = Path.GetDirectoryName(manifest)!;
        var defaultSetup = options.Setup is null ? null : Path.GetFullPath(options.Setup);
        if (defaultSetup is not null && !File.Exists(defaultSetup)) throw new InputException($"setup file not found: {defaultSetup}", options.Setup);
        var defaultCalibration = options.Calibration is null ? null : Path.GetFullPath(options.Calibration);
        if (defaultCalibration is not null && !File.Exists(defaultCalibration)) throw new InputException($"calibration file not found: {defaultCalibration}", options.Calibration);

        // first pass: header check, row count of this shard, manifest hash (all streamed)
        var shard = options.Shard;
        long total = 0;
        foreach (var row in Manifest.Read(manifestPath))
            if (shard.Contains(row.IdText))
                total++;
        var manifestSha = Sha256OfFile(manifest);

        var outDir = Path.GetFullPath(outDirectory);
        Directory.CreateDirectory(BatchLayout.Items(outDir));
        var staging = Path.Combine(outDir, BatchLayout.StagingFolder, shard.Tag);
        if (Directory.Exists(staging)) Directory.Delete(staging, recursive: true); // leftovers of an interrupted run of this shard
        Directory.CreateDirectory(staging);

        var context = new Context(options, manifestDir, defaultSetup, defaultCalibration, outDir, staging);
        var clock = Stopwatch.StartNew();
        var finished = new List<string>();
        long ok = 0, failed = 0, skipped = 0, done = 0;
        var firstLine = new Dictionary<string, long>(StringComparer.Ordinal);

        IEnumerable<ManifestRow> Rows()
        {
            foreach (var row in Manifest.Read(manifestPath))
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

        var complete = true;
        using var stop = CancellationTokenSource.CreateLinkedTokenSource(cancel);
        var ambient = Cancellation.Use(stop.Token); // the items' reading, solving and refining loops check it
        var publisher = new Publisher(staging, 4 * options.Jobs + 4, stop);
        try
        {
            Parallel.ForEach(
                System.Collections.Concurrent.Partitioner.Create(Rows(), EnumerablePartitionerOptions.NoBuffering),
                new ParallelOptions { MaxDegreeOfParallelism = options.Jobs, CancellationToken = stop.Token },
                row =>
                {
                    var (record, wasSkipped) = Process(row, context, manifest, publisher);
                    BatchProgress report;
                    lock (finished)
                    {
                        finished.Add(record.Id);
                        done++;
                        if (record.Status == ItemStatus.Ok) ok++;
                        else failed++;
                        if (wasSkipped) skipped++;
                        report = new BatchProgress(total, done, ok, failed, skipped, clock.Elapsed, record.Id, record.Error, wasSkipped);
                    }

                    progress?.Report(report);
                });
        }
        catch (AggregateException e) when (e.InnerExceptions.Count == 1 && e.InnerException is IOException or UnauthorizedAccessException)
        {
            // the output folder itself failed (disk full, permissions): nothing more can be written
            System.Runtime.ExceptionServices.ExceptionDispatchInfo.Capture(e.InnerException!).Throw();
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
            ambient.Dispose();
        }

        // the summary of what finished is written even when the run was stopped
        using var summaryScope = Cancellation.Use(CancellationToken.None);

        // the output folder itself failed while publishing (disk full, permissions): nothing more can be written
        if (publisher.Failure is not null) System.Runtime.ExceptionServices.ExceptionDispatchInfo.Capture(publisher.Failure).Throw();

        finished.Sort(ItemId.Order);
        var summary = BatchLayout.Summary(outDir, shard);
        SummaryTable.Write(summary, BatchLayout.Items(outDir), finished);
        new BatchStatus(shard, complete, manifestPath, manifestSha, context.Tool, total, ok, failed, skipped).Write(BatchLayout.Status(outDir, shard));
        TryDelete(staging);
        var stagingParent = Path.GetDirectoryName(staging)!;
        if (Directory.Exists(stagingParent) && !Directory.EnumerateFileSystemEntries(stagingParent).Any()) TryDelete(stagingParent); // no empty staging/ left
        return new BatchResult(total, ok, failed, skipped, complete, summary, clock.Elapsed);
    }

    /// <summary>Everything an item needs from the run: settings, resolved defaults, caches.</summary>
    private sealed class Context(BatchOptions options, string manifestDir, string? setup, string? calibration, string outDir, string staging)
    {
        public BatchOptions Options { get; } = options;
        public string ManifestDir { get; } = manifestDir;
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

    /// <summary>
    /// Publishes finished items on a thread of its own: flushes the files of a staged item folder to disk and renames
    /// the folder into place. Workers hand a folder over and go on with their next item instead of waiting for the
    /// disk; a full queue makes them wait (bounded memory). The first failure (disk full, permissions) stops the
    /// batch through <paramref name="stop"/> and is rethrown by the caller after <see cref="Finish"/>.
    /// </summary>
    private sealed class Publisher
    {
        private readonly BlockingCollection<(string Stage, string Target)> _queue;
        private readonly Thread _thread;
        private readonly string _stagingRoot;
        private readonly CancellationTokenSource _stop;

        public Publisher(string stagingRoot, int capacity, CancellationTokenSource stop)
        {
            _stagingRoot = stagingRoot;
            _stop = stop;
            _queue = new BlockingCollection<(string, string)>(capacity);
            _thread = new Thread(Loop) { IsBackground = true, Name = "orderunfold batch publisher" };
            _thread.Start();
        }

        public Exception? Failure { get; private set; }

        public void Add(string stage, string target) => _queue.Add((stage, target));

        /// <summary>No more items: publishes what is queued and waits for it.</summary>
        public void Finish()
        {
            _queue.CompleteAdding();
            _thread.Join();
            _queue.Dispose();
        }

        private void Loop()
        {
            foreach (var (stage, target) in _queue.GetConsumingEnumerable())
            {
                if (Failure is not null) continue; // keep taking items so no worker blocks on a full queue
                try
                {
                    foreach (var file in Directory.EnumerateFiles(stage, "*", SearchOption.AllDirectories)) AtomicFile.FlushToDisk(file);
                    Publish(stage, target, _stagingRoot);
                }
                catch (Exception e) when (e is IOException or UnauthorizedAccessException)
                {
                    Failure = e;
                    _stop.Cancel();
                }
            }
        }
    }

    /// <summary>Runs (or skips) one row; never throws for a problem of the item itself. A run item is handed to
    /// <paramref name="publisher"/>.</summary>
    private static (ItemRecord Record, bool Skipped) Process(ManifestRow row, Context ctx, string manifest, Publisher publisher)
    {
        var clock = Stopwatch.StartNew();
        var folder = row.Folder;
        var target = BatchLayout.Item(ctx.OutDir, folder);
        Plan plan;
        try
        {
            plan = MakePlan(row, ctx, manifest);
        }
        catch (Exception e) when (e is InputException or IOException or UnauthorizedAccessException)
        {
            plan = new Plan(null, null, Key(ctx, folder, row.Timestamp, ["plan-error " + e.Message]), Message(e));
        }

        var existing = ItemRecord.TryRead(Path.Combine(target, BatchLayout.DoneFile));
        // a failure from bad input is kept until the inputs change (or --retry-failed); an internal error runs again
        if (existing is not null && existing.Key == plan.Key &&
            (existing.Status == ItemStatus.Ok || (!ctx.Options.RetryFailed && !IsInternalError(existing.Error))))
            return (existing, true);

        var stage = Path.Combine(ctx.Staging, folder);
        if (Directory.Exists(stage)) Directory.Delete(stage, recursive: true);
        Directory.CreateDirectory(stage);
        ItemRecord record;
        var baseRecord = new ItemRecord { Id = folder, Key = plan.Key, Status = ItemStatus.Failed, ManifestLine = row.Line, Timestamp = row.Timestamp };
        if (plan.Error is not null)
        {
            record = baseRecord with { Error = plan.Error };
        }
        else
        {
            try
            {
                var run = UnfoldPipeline.Run(plan.Setup!, null, plan.Calibration);
                UnfoldOutputs.Write(run, stage, ctx.Options.Figures, ctx.Options.ToolVersion, staged: true);
                var analysis = ctx.Analysis.Analyse(run);
                var first = run.Result.Sweeps.Count > 0 ? run.Result.Sweeps[0] : null;
                var fsr = run.Sweeps.Count > 0 ? run.Sweeps[0].Instrument.FsrHz : (double?)null;
                record = baseRecord with
                {
                    Status = ItemStatus.Ok,
                    Lines = run.Result.Lines.Count,
                    StrongestLineHz = first is not null && fsr is double p && run.Result.Lines.Count > 0 ? PositiveMod(-first.OffsetHz, p) : null,
                    FrameFsrHz = fsr,
                    OrdersResolved = run.Result.OrdersResolved,
                    ReducedChiSquare = run.Result.ReducedChiSquare,
                    Warnings = run.AllWarnings.Count(),
                    Analysis = analysis,
                };
            }
            catch (Exception e) when (e is OperationCanceledException && Cancellation.Token.IsCancellationRequested)
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
                record = baseRecord with { Error = Message(e) };
            }
        }

        record = record with { Seconds = clock.Elapsed.TotalSeconds };
        record.Write(Path.Combine(stage, BatchLayout.DoneFile), staged: true);
        publisher.Add(stage, target);
        return (record, false);
    }

    private const string InternalErrorPrefix = "internal error (";

    private static string Message(Exception e) => e switch
    {
        InputException ie => ie.Located,
        IOException or UnauthorizedAccessException => e.Message,
        _ => $"{InternalErrorPrefix}{e.GetType().Name}): {InputLimits.Clip(e.Message, 300)}",
    };

    private static bool IsInternalError(string? error) => error is not null && error.StartsWith(InternalErrorPrefix, StringComparison.Ordinal);

    /// <summary>The setup and calibration an item runs with, its key, or why it cannot run.</summary>
    private sealed record Plan(Setup? Setup, CalibrationSet? Calibration, string Key, string? Error);

    private static Plan MakePlan(ManifestRow row, Context ctx, string manifest)
    {
        var where = $"{manifest}:{row.Line}";
        if (row.Problem is not null)
            return new Plan(null, null, Key(ctx, row.Folder, row.Timestamp, ["row-problem " + row.Problem]), $"{where}: {row.Problem}");

        var setupPath = row.Setup is not null ? Path.GetFullPath(Path.Combine(ctx.ManifestDir, row.Setup)) : ctx.DefaultSetup;
        // files named in the manifest stay in its folder unless --allow-outside-paths (Io/InputLimits.cs)
        foreach (var named in new[] { row.Setup, row.Calibration }.Concat(row.Files ?? []))
            if (named is not null && InputLimits.OutsideMessage(Path.Combine(ctx.ManifestDir, named), ctx.ManifestDir, manifest) is string outside)
                return new Plan(null, null, Key(ctx, row.Folder, row.Timestamp, ["outside " + named]), $"{where}: {outside}");
        if (setupPath is null)
            return new Plan(null, null, Key(ctx, row.Folder, row.Timestamp, ["no-setup"]), $"{where}: no setup: give the row a setup column value or the batch a --setup");
        var (setup, setupSha) = Cached(ctx.Setups, setupPath, () =>
        {
            if (!File.Exists(setupPath)) throw new InputException($"setup file not found: {setupPath}", where);
            var text = InputLimits.ReadAllText(setupPath, "setup file");
            return (SetupReader.ReadText(text, setupPath), Sha256Hex(Encoding.UTF8.GetBytes(text)));
        });

        var parts = new List<string> { "setup " + setupSha };
        if (row.Files is { } files)
        {
            if (files.Count != setup.Sweeps.Count)
                return new Plan(null, null, Key(ctx, row.Folder, row.Timestamp, [.. parts, "files " + string.Join(";", files)]),
                    $"{where}: files lists {files.Count} file(s) but the setup {setupPath} has {setup.Sweeps.Count} [[sweep]] table(s); expected one file per [[sweep]], in order, separated by ';'");
            setup = setup with
            {
                Sweeps = setup.Sweeps.Select((s, i) => s with { File = s.File with { Path = Path.GetFullPath(Path.Combine(ctx.ManifestDir, files[i])) } }).ToList(),
            };
        }

        if (ctx.Options.NoRefine && setup.Solve.Refine) setup = setup with { Solve = setup.Solve with { Refine = false } };
        var calibrationPath = row.Calibration is not null ? Path.GetFullPath(Path.Combine(ctx.ManifestDir, row.Calibration)) : ctx.DefaultCalibration;
        CalibrationSet? calibration = null;
        string? missing = null;
        if (calibrationPath is not null)
        {
            if (!File.Exists(calibrationPath))
            {
                missing = $"calibration file not found: {calibrationPath}";
                parts.Add("calibration missing " + calibrationPath);
            }
            else
            {
                var (set, sha) = Cached(ctx.Calibrations, calibrationPath, () => (SavedCalibration.Read(calibrationPath), Sha256OfFile(calibrationPath)));
                calibration = set;
                parts.Add("calibration " + sha);
            }
        }
        else
        {
            foreach (var c in setup.Calibrations) parts.Add("calibration-sweep " + FileState(c.File.Path));
        }

        foreach (var s in setup.Sweeps)
        {
            var state = FileState(s.File.Path);
            parts.Add("sweep " + state);
            if (missing is null && !state.StartsWith("sha256 ", StringComparison.Ordinal)) missing = $"sweep file {state}";
        }

        var key = Key(ctx, row.Folder, row.Timestamp, parts);
        return missing is not null ? new Plan(null, null, key, $"{where}: {missing}") : new Plan(setup, calibration, key, null);
    }

    /// <summary>"sha256 HEX" of a file, or why it has none ("not found: PATH", "unreadable: ...").</summary>
    private static string FileState(string path)
    {
        try
        {
            if (!File.Exists(path)) return $"not found: {path}";
            InputLimits.CheckFile(path, "sweep file");
            return "sha256 " + Sha256OfFile(path);
        }
        catch (InputException e)
        {
            return $"unreadable: {e.Message}";
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            return $"unreadable: {path}: {e.Message}";
        }
    }

    private static T Cached<T>(ConcurrentDictionary<string, Lazy<T>> cache, string key, Func<T> load)
    {
        if (cache.Count > CacheLimit) cache.Clear();
        return cache.GetOrAdd(key, _ => new Lazy<T>(load, LazyThreadSafetyMode.ExecutionAndPublication)).Value;
    }

    /// <summary>SHA-256 (hex) over the tool, settings, item and input states.</summary>
    private static string Key(Context ctx, string folder, string? timestamp, IEnumerable<string> parts)
    {
        var sb = new StringBuilder("orderunfold-batch-key 1\n");
        sb.Append("tool ").Append(ctx.Tool).Append('\n');
        sb.Append("analysis ").Append(ctx.Analysis.Identity).Append('\n');
        sb.Append("plots ").Append(ctx.Options.Figures is not null ? "yes" : "no").Append('\n');
        sb.Append("refine ").Append(ctx.Options.NoRefine ? "off" : "setup").Append('\n');
        sb.Append("id ").Append(folder).Append('\n');
        sb.Append("timestamp ").Append(timestamp ?? "-").Append('\n');
        foreach (var p in parts) sb.Append(p).Append('\n');
        return Sha256Hex(Encoding.UTF8.GetBytes(sb.ToString()));
    }

    /// <summary>Moves a complete staging folder into place; an older folder of the same item is moved away first and then removed.</summary>
    internal static void Publish(string stage, string target, string stagingRoot)
    {
        if (Directory.Exists(target))
        {
            var old = Path.Combine(stagingRoot, ".old-" + Guid.NewGuid().ToString("N"));
            Directory.Move(target, old);
            Directory.Move(stage, target);
            TryDelete(old);
        }
        else
        {
            Directory.Move(stage, target);
        }
    }

    private static void TryDelete(string dir)
    {
        try
        {
            if (Directory.Exists(dir)) Directory.Delete(dir, recursive: true);
        }
        catch (IOException)
        {
            // another process of the same shard tag, or a file held open: left for the next run to remove
        }
    }

    internal static double PositiveMod(double x, double m)
    {
        var r = x % m;
        return r < 0 ? r + m : r;
    }

    internal static string Sha256OfFile(string path)
    {
        using var s = File.OpenRead(path);
        return Convert.ToHexStringLower(SHA256.HashData(s));
    }

    private static string Sha256Hex(byte[] bytes) => Convert.ToHexStringLower(SHA256.HashData(bytes));
}
