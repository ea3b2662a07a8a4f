using OrderUnfold.Pipeline.Batch;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold merge DIR...</c>: one summary from the shards of a batch.</summary>
public sealed class MergeCommand : ICommand
{
    public string Name => "merge";
    public string Summary => "combine the shard outputs of a batch (--shard i/N) into one summary.csv";

    public string Usage => """
        orderunfold merge DIR [DIR...] [--out DIR]

        Reads the shard outputs (DIR/shards/shard-i-of-N.csv and .json) of one batch, checks that every
        shard 0..N-1 is present once, finished and ran the same manifest, and writes summary.csv (sorted by
        id: the same rows an unsharded run writes) into --out (default: the first DIR). When shards wrote
        into different folders, their item folders are copied into --out.
        Exit codes: 0 all items ok, 1 some items failed, 2 shards missing, unfinished or inconsistent.
        """;

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args, ["out"], []);
        a.Positional(0, "DIR (the output folder of the sharded batch)");
        var result = BatchMerge.Run(a.Positionals, a.Value("out"));
        foreach (var w in result.Warnings) stderr.WriteLine($"warning: {w}");
        stdout.WriteLine($"merged {result.Shards} shard(s): {result.Rows} item(s), {result.Ok} ok, {result.Failed} failed" +
                         (result.CopiedItems > 0 ? $"; {result.CopiedItems} item folder(s) copied" : ""));
        stdout.WriteLine($"summary: {result.SummaryPath}");
        return result.Failed > 0 ? ExitCodes.SomeFailed : ExitCodes.Ok;
    }
}
