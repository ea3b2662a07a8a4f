using System.CommandLine;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Pipeline.Batch;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold merge DIR...</c>: one summary from the shards of a batch.</summary>
internal sealed class MergeCommand : VerbCommand
{
    private readonly Argument<string[]> _folders = new("DIR") { Arity = ArgumentArity.OneOrMore, Description = "the output folder(s) of the sharded batch" };
    private readonly Option<string?> _out = SharedOptions.Out("the first DIR");

    public MergeCommand(CliContext cli) : base("merge", "combine the shard outputs of a batch (--shard i/N) into one summary.csv", cli)
    {
        Add(_folders);
        Add(_out);
    }

    public override string Details => """
        Reads the shard outputs (DIR/shards/shard-i-of-N.csv and .json) of one batch, checks that every
        shard 0..N-1 is present once, finished and ran the same manifest, and writes summary.csv (sorted by
        id: the same rows an unsharded run writes) into the output folder. When shards wrote into different
        folders, their item folders are copied into it.
        Exit codes: 0 all items ok, 1 some items failed, 2 shards missing, unfinished or inconsistent.
        """;

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        var result = BatchMerge.Run(parse.GetValue(_folders)!, parse.GetValue(_out), cancellationToken);
        foreach (var w in result.Warnings) Error.WriteLine($"warning: {w}");
        Out.WriteLine($"merged {result.Shards} shard(s): {result.Rows} item(s), {result.Ok} ok, {result.Failed} failed" +
                      (result.CopiedItems > 0 ? $"; {result.CopiedItems} item folder(s) copied" : ""));
        Out.WriteLine($"summary: {result.SummaryPath}");
        return result.Failed > 0 ? ExitCodes.SomeFailed : ExitCodes.Ok;
    }
}
