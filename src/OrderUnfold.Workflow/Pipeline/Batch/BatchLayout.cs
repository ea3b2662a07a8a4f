using OrderUnfold.Io;
using OrderUnfold.Outputs;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>
/// Where a batch keeps things inside its output folder:
/// <code>
/// DIR/items/&lt;id&gt;/        report.json, lines.csv, spectrum.csv, [PNGs], done.json (written last)
/// DIR/summary.csv           one row per item, sorted by id (unsharded run, or after merge)
/// DIR/batch.json            status of the run that wrote summary.csv (complete or interrupted, counts)
/// DIR/shards/&lt;tag&gt;.csv     summary of one shard (tag: shard-i-of-N)
/// DIR/shards/&lt;tag&gt;.json    status of that shard
/// DIR/staging/&lt;tag&gt;/       items being written (renamed into items/ when complete; removed on the next run)
/// </code>
/// </summary>
public static class BatchLayout
{
    public const string ItemsFolder = "items";
    public const string StagingFolder = "staging";
    public const string ShardsFolder = "shards";
    public const string SummaryFile = "summary.csv";
    public const string StatusFile = "batch.json";
    public const string DoneFile = "done.json";

    public static string Items(string dir) => Path.Combine(dir, ItemsFolder);

    public static string Item(string dir, string id) => Path.Combine(dir, ItemsFolder, id);

    /// <summary>summary.csv of the whole batch, or the shard's summary under shards/.</summary>
    public static string Summary(string dir, Shard shard) =>
        shard.IsAll ? Path.Combine(dir, SummaryFile) : Path.Combine(dir, ShardsFolder, shard.Tag + ".csv");

    /// <summary>batch.json of the whole batch, or the shard's status under shards/.</summary>
    public static string Status(string dir, Shard shard) =>
        shard.IsAll ? Path.Combine(dir, StatusFile) : Path.Combine(dir, ShardsFolder, shard.Tag + ".json");
}

/// <summary>What batch.json (or a shard's status file) says about the run that wrote the summary.</summary>
/// <param name="Shard">The share of the manifest.</param>
/// <param name="Complete">False when the run was interrupted: the summary lists only the items finished.</param>
/// <param name="Manifest">Manifest path as given.</param>
/// <param name="ManifestSha256">SHA-256 of the manifest bytes (shards of one batch must agree).</param>
/// <param name="Tool">Tool version and build id.</param>
/// <param name="Rows">Manifest rows in this shard.</param>
/// <param name="Ok">Items finished ok (including skipped ones).</param>
/// <param name="Failed">Items failed.</param>
/// <param name="Skipped">Items found finished from an earlier run.</param>
public sealed record BatchStatus(Shard Shard, bool Complete, string Manifest, string ManifestSha256, string Tool, long Rows, long Ok, long Failed, long Skipped)
{
    public const string Format = "orderunfold-batch-status";

    /// <summary>Writes the status atomically (<see cref="BatchStatusFile"/>).</summary>
    public void Write(string path) => AtomicFile.WriteAllText(path, OutputJson.Serialize(new BatchStatusFile
    {
        ShardIndex = Shard.Index,
        ShardCount = Shard.Count,
        Complete = Complete,
        Manifest = Manifest,
        ManifestSha256 = ManifestSha256,
        Tool = Tool,
        Rows = Rows,
        Ok = Ok,
        Failed = Failed,
        Skipped = Skipped,
    }, c => c.BatchStatusFile));

    /// <summary>Reads a status file; InputException (file, line, column) when it is not one.</summary>
    public static BatchStatus Read(string path)
    {
        byte[] bytes;
        try
        {
            bytes = File.ReadAllBytes(path);
        }
        catch (IOException e)
        {
            throw new InputException($"cannot read the batch status file: {e.Message}", path);
        }

        var o = OutputJson.Deserialize(path, bytes, c => c.BatchStatusFile, "batch status file");
        if (o.Format != Format) throw new InputException($"not a batch status file (expected \"format\": \"{Format}\")", path);
        return new BatchStatus(new Shard(o.ShardIndex, o.ShardCount), o.Complete, o.Manifest, o.ManifestSha256, o.Tool, o.Rows, o.Ok, o.Failed, o.Skipped);
    }
}
