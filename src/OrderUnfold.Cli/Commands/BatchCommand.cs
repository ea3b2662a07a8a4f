using OrderUnfold.Io;
using System.CommandLine;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Pipeline.Batch;
using OrderUnfold.Plotting;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold batch MANIFEST --out DIR</c>: the unfold on every item of a manifest.</summary>
internal sealed class BatchCommand : VerbCommand
{
    private readonly Argument<string> _manifest = PathArgument("MANIFEST", "a CSV file listing the items (see below)");
    private readonly Option<string?> _out = SharedOptions.Out(null);
    private readonly Option<int?> _jobs = SharedOptions.Jobs();
    private readonly Option<Shard?> _shard = new("--shard")
    {
        HelpName = "i/N",
        Description = "run only shard i of N (0-based: 0 ≤ i < N), chosen by a stable hash of the id; writes DIR/shards/shard-i-of-N.csv; then 'merge DIR'",
        CustomParser = result =>
        {
            if (result.Tokens.Count == 0) return null;
            try
            {
                return Shard.Parse(result.Tokens[^1].Value);
            }
            catch (InputException e)
            {
                result.AddError(e.Message);
                return null;
            }
        },
    };
    private readonly Option<string?> _setup = SharedOptions.Setup("setup for rows without a setup value");
    private readonly Option<string?> _calibration = SharedOptions.Calibration("calibration file for rows without a calibration value");
    private readonly Option<bool> _plots = ValueOptions.Flag("--plots", "draw each item's PNG plots: a batch draws none unless asked (one set per item is slow)");
    private readonly Option<bool> _noPlots = SharedOptions.NoPlots("draw no plots: the default of a batch, accepted so that one script can pass it to every command");
    private readonly Option<bool> _noRefine = ValueOptions.Flag("--no-refine",
        "skip the off-grid line refinement whatever the setups say: about a fifth less time per single-sweep item, but no refined uncertainties or order checks");
    private readonly Option<bool> _retryFailed = ValueOptions.Flag("--retry-failed", "run failed items again even if their inputs did not change");
    private readonly Option<bool> _quiet = SharedOptions.Quiet();

    public BatchCommand(CliContext cli) : base("batch", "unfold every item of a manifest (parallel, resumable, shardable) into one summary", cli)
    {
        Add(_manifest);
        AddOptions([_out, _jobs, _shard, _setup, _calibration, _plots, _noPlots, _noRefine, _retryFailed, _quiet]);
    }

    public override string Details => """
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
        Ctrl-C (or SIGTERM) stops the items in flight (they run again on resume), writes the summary of what
        finished and exits with 130 (143 for SIGTERM); run the same command again to resume. Items that failed
        with an internal error run again on resume; items refused for bad input only with --retry-failed or
        when their inputs change. Files named in the manifest are read from its folder and below unless
        --allow-outside-paths is given.
        Exit codes: 0 all items ok, 1 some items failed, 2 bad usage or manifest, 130/143 interrupted.
        See docs/batch.md.
        """;

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        if (parse.GetValue(_plots) && parse.GetValue(_noPlots)) throw new UsageException("--plots and --no-plots contradict each other; give one");
        var outDir = parse.GetValue(_out)!;
        var options = new BatchOptions
        {
            Jobs = parse.GetValue(_jobs) ?? Environment.ProcessorCount,
            Shard = parse.GetValue(_shard) ?? Shard.All,
            Setup = parse.GetValue(_setup),
            Calibration = parse.GetValue(_calibration),
            Figures = parse.GetValue(_plots) ? new FigureWriter() : null,
            NoRefine = parse.GetValue(_noRefine),
            RetryFailed = parse.GetValue(_retryFailed),
            ToolVersion = Cli.Version,
            Analysis = Context.Services.BatchItemAnalysis,
        };

        // Ctrl-C and SIGTERM cancel the run's token (Program.cs): items in flight stop and run again on resume
        var display = new BatchProgressDisplay(Error, parse.GetValue(_quiet), Terminal(Error));
        BatchResult result;
        try
        {
            result = BatchRunner.Run(parse.GetValue(_manifest)!, outDir, options, display, cancellationToken);
        }
        finally
        {
            display.Finish();
        }

        var ran = result.Ok + result.Failed - result.Skipped;
        var rate = result.Elapsed.TotalSeconds > 0 ? ran / result.Elapsed.TotalSeconds : 0;
        Out.WriteLine($"batch{(options.Shard.IsAll ? "" : $" shard {options.Shard}")}: {result.Ok + result.Failed} of {result.Rows} item(s) finished: {result.Ok} ok, {result.Failed} failed, " +
                      $"{result.Skipped} already done; {ran} run in {result.Elapsed.TotalSeconds:F1} s ({rate:F1} items/s, {options.Jobs} job{(options.Jobs == 1 ? "" : "s")})");
        Out.WriteLine($"summary: {result.SummaryPath}");
        if (!options.Shard.IsAll) Out.WriteLine($"when every shard has finished: {Hint.Command("merge " + Hint.Quote(Path.GetFullPath(outDir)))}");
        if (!result.Complete)
        {
            Out.WriteLine("interrupted: the summary lists the items finished so far; run the same command again to resume");
            return ExitCodes.Interrupted;
        }

        return result.Failed > 0 ? ExitCodes.SomeFailed : ExitCodes.Ok;
    }

    /// <summary>True when progress goes to an interactive terminal (a bar is drawn) rather than a file or pipe (plain lines).</summary>
    private static bool Terminal(TextWriter stderr) => ReferenceEquals(stderr, Console.Error) && !Console.IsErrorRedirected;
}
