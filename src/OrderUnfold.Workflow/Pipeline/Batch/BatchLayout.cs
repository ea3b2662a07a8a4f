using System.Text.Json;
using System.Text.Json.Nodes;
using OrderUnfold.Io;

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

    public void Write(string path)
    {
        var o = new JsonObject
        {
            ["format"] = Format,
            ["version"] = 1,
            ["shard_index"] = Shard.Index,
            ["shard_count"] = Shard.Count,
            ["complete"] = Complete,
            ["manifest"] = Manifest,
            ["manifest_sha256"] = ManifestSha256,
            ["tool"] = Tool,
            ["rows"] = Rows,
            ["ok"] = Ok,
            ["failed"] = Failed,
            ["skipped"] = Skipped,
        };
        AtomicFile.WriteAllText(path, o.ToJsonString(new JsonSerializerOptions { WriteIndented = true }) + "\n");
    }

    /// <summary>Reads a status file; InputException when it is not one.</summary>
    public static BatchStatus Read(string path)
    {
        try
        {
            var o = JsonNode.Parse(File.ReadAllText(path))!.AsObject();
            if ((string?)o["format"] != Format) throw new InputException($"not a batch status file (expected \"format\": \"{Format}\")", path);
            return new BatchStatus(new Shard((int)o["shard_index"]!, (int)o["shard_count"]!), (bool)o["complete"]!, (string)o["manifest"]!,
                (string)o["manifest_sha256"]!, (string)o["tool"]!, (long)o["rows"]!, (long)o["ok"]!, (long)o["failed"]!, (long)o["skipped"]!);
        }
        catch (Exception e) when (e is JsonException or InvalidOperationException or FormatException or NullReferenceException)
        {
            throw new InputException($"damaged batch status file: {e.Message}", path);
        }
        catch (IOException e)
        {
            throw new InputException($"cannot read the batch status file: {e.Message}", path);
        }
    }
}
