using OrderUnfold.Plotting;
using System.Runtime.InteropServices;
using OrderUnfold.Pipeline.Batch;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold batch MANIFEST --out DIR</c>: the unfold on every item of a manifest.</summary>
public sealed class BatchCommand : ICommand
{
    /// <summary>Exit code when the run was interrupted by Ctrl-C (SIGTERM gives <see cref="ExitCodes.Terminated"/>).</summary>
    public const int Interrupted = ExitCodes.Interrupted;

    public string Name => "batch";
    public string Summary => "unfold every item of a manifest (parallel, resumable, shardable) into one summary";

    public string Usage => """
        orderunfold batch MANIFEST --out DIR [--jobs N] [--shard i/N] [--setup FILE] [--calibration FILE]
                                   [--plots] [--no-refine] [--retry-failed] [--quiet]

        MANIFEST is a CSV file with a header row and one item per line (read line by line):
          id           required, unique; letters, digits, '.', '_', '-' (names the item's folder)
          setup        setup file, relative to the manifest (empty: --setup)
          files        sweep files separated by ';', replacing the setup's [[sweep]] files in order
          calibration  calibration JSON to reuse (empty: --calibration, or calibrate from the setup)
          timestamp    ISO 8601, e.g. 2025-03-14T09:00:05Z (no offset: UTC)
        Each item writes DIR/items/<id>/ (report.json, lines.csv, spectrum.csv, PNGs with --plots, and
        done.json last); DIR/summary.csv gets one row per item, sorted by id. An item whose inputs, setup,
        calibration, settings and tool version match a finished one is skipped, so a re-run resumes.
        A failing item records its error; the rest go on.

          --jobs N         items at once (default: the number of cores, here {cores})
          --shard i/N      run only shard i of N (0-based: 0 ≤ i < N), chosen by a stable hash of the id;
                           writes DIR/shards/shard-i-of-N.csv; then 'orderunfold merge DIR'
          --setup FILE     setup for rows without a setup value
          --calibration F  calibration file for rows without a calibration value
          --plots          also write each item's PNG plots (slower)
          --no-refine      skip the off-grid line refinement whatever the setups say: about a fifth
                           less time per single-sweep item, but no refined uncertainties or order checks
          --retry-failed   run failed items again even if their inputs did not change
          --quiet          no progress display
        Ctrl-C (or SIGTERM) stops the items in flight (they run again on resume), writes the summary of what
        finished and exits with 130 (143 for SIGTERM); run the same command again to resume. Items that failed
        with an internal error run again on resume; items refused for bad input only with --retry-failed or
        when their inputs change. Files named in the manifest are read from its folder and below unless
        --allow-outside-paths is given.
        Exit codes: 0 all items ok, 1 some items failed, 2 bad usage or manifest, 130/143 interrupted.
        See docs/batch.md.
        """.Replace("{cores}", Environment.ProcessorCount.ToString(System.Globalization.CultureInfo.InvariantCulture));

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args, ["out", "jobs", "shard", "setup", "calibration"], ["plots", "no-refine", "retry-failed", "quiet"]);
        var manifest = a.Positional(0, "MANIFEST (a CSV file listing the items)");
        a.NoMorePositionals(1);
        var outDir = a.Value("out") ?? throw new UsageException("batch: --out DIR is required");
        var options = new BatchOptions
        {
            Jobs = a.Int("jobs", 1) ?? Environment.ProcessorCount,
            Shard = a.Value("shard") is string s ? ParseShard(s) : Shard.All,
            Setup = a.Value("setup"),
            Calibration = a.Value("calibration"),
            Figures = a.Flag("plots") ? new FigureWriter() : null,
            NoRefine = a.Flag("no-refine"),
            RetryFailed = a.Flag("retry-failed"),
            ToolVersion = Cli.Version,
        };

        // Ctrl-C and SIGTERM cancel the run's token (Program.cs): items in flight stop and run again on resume
        var display = new BatchProgressDisplay(stderr, a.Flag("quiet"), Terminal(stderr));
        BatchResult result;
        try
        {
            result = BatchRunner.Run(manifest, outDir, options, display, OrderUnfold.Cancellation.Token);
        }
        finally
        {
            display.Finish();
        }

        var ran = result.Ok + result.Failed - result.Skipped;
        var rate = result.Elapsed.TotalSeconds > 0 ? ran / result.Elapsed.TotalSeconds : 0;
        stdout.WriteLine($"batch{(options.Shard.IsAll ? "" : $" shard {options.Shard}")}: {result.Ok + result.Failed} of {result.Rows} item(s) finished: {result.Ok} ok, {result.Failed} failed, " +
                         $"{result.Skipped} already done; {ran} run in {result.Elapsed.TotalSeconds:F1} s ({rate:F1} items/s, {options.Jobs} job{(options.Jobs == 1 ? "" : "s")})");
        stdout.WriteLine($"summary: {result.SummaryPath}");
        if (!options.Shard.IsAll) stdout.WriteLine($"when every shard has finished: {Hint.Command("merge " + Hint.Quote(Path.GetFullPath(outDir)))}");
        if (!result.Complete)
        {
            stdout.WriteLine("interrupted: the summary lists the items finished so far; run the same command again to resume");
            return ExitCodes.Interrupted;
        }

        return result.Failed > 0 ? ExitCodes.SomeFailed : ExitCodes.Ok;
    }

    private static Shard ParseShard(string text)
    {
        try
        {
            return Shard.Parse(text);
        }
        catch (InputException e)
        {
            throw new UsageException("batch: " + e.Message);
        }
    }

    /// <summary>True when progress goes to an interactive terminal (a bar is drawn) rather than a file or pipe (plain lines).</summary>
    private static bool Terminal(TextWriter stderr) => ReferenceEquals(stderr, Console.Error) && !Console.IsErrorRedirected;
}

/// <summary>
/// Progress of a batch on standard error: a one-line bar redrawn in place on a terminal, or a plain line every
/// few seconds when the output goes to a file (as in a cluster job's log). The first failures are printed as
/// they happen.
/// </summary>
internal sealed class BatchProgressDisplay(TextWriter err, bool quiet, bool terminal) : IProgress<BatchProgress>
{
    private const int FailuresShown = 10;
    private readonly object _gate = new();
    private DateTime _lastDraw = DateTime.MinValue;
    private BatchProgress? _last;
    private int _failuresShown;
    private bool _drawn;

    public void Report(BatchProgress p)
    {
        if (quiet) return;
        lock (_gate)
        {
            if (_last is not null && p.Finished < _last.Finished) return; // a late report from another worker
            _last = p;
            if (p.LastError is not null && !p.LastSkipped && _failuresShown < FailuresShown)
            {
                Clear();
                err.WriteLine($"failed {p.LastId}: {p.LastError}");
                if (++_failuresShown == FailuresShown) err.WriteLine($"(further failures are listed in the summary only)");
            }

            var now = DateTime.UtcNow;
            var interval = terminal ? TimeSpan.FromMilliseconds(100) : TimeSpan.FromSeconds(5);
            if (now - _lastDraw < interval && p.Finished != p.Total) return;
            _lastDraw = now;
            Draw(p);
        }
    }

    public void Finish()
    {
        lock (_gate)
        {
            if (quiet || _last is null) return;
            if (terminal)
            {
                Draw(_last);
                err.WriteLine();
                _drawn = false;
            }
        }
    }

    private void Draw(BatchProgress p)
    {
        var remaining = p.ItemsPerSecond > 0 ? TimeSpan.FromSeconds((p.Total - p.Finished) / p.ItemsPerSecond) : (TimeSpan?)null;
        var eta = remaining is TimeSpan r ? $" ETA {(int)r.TotalHours}:{r.Minutes:D2}:{r.Seconds:D2}" : "";
        var counts = $"{p.Finished}/{p.Total}  ok {p.Ok}  failed {p.Failed}  skipped {p.Skipped}  {p.ItemsPerSecond:F1} items/s{eta}";
        if (terminal)
        {
            const int width = 30;
            var filled = p.Total > 0 ? (int)(width * p.Finished / p.Total) : 0;
            err.Write($"\r[{new string('#', filled)}{new string('.', width - filled)}] {counts}   ");
            err.Flush();
            _drawn = true;
        }
        else
        {
            err.WriteLine($"batch: {counts}");
        }
    }

    private void Clear()
    {
        if (!_drawn) return;
        err.Write("\r" + new string(' ', 110) + "\r");
        _drawn = false;
    }
}
