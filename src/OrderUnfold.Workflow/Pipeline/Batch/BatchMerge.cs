using OrderUnfold.Io;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>What <see cref="BatchMerge.Run"/> did.</summary>
/// <param name="Shards">Number of shards merged.</param>
/// <param name="Rows">Summary rows written.</param>
/// <param name="Ok">Rows with status ok.</param>
/// <param name="Failed">Rows with status failed.</param>
/// <param name="CopiedItems">Item folders copied from shard folders other than the output folder.</param>
/// <param name="SummaryPath">The merged summary.csv.</param>
/// <param name="Warnings">Anything worth knowing (e.g. shards run by different tool builds).</param>
public sealed record MergeResult(int Shards, long Rows, long Ok, long Failed, long CopiedItems, string SummaryPath, IReadOnlyList<string> Warnings);

/// <summary>
/// Combines the outputs of the N shards of one batch (<c>--shard i/N</c>) into one summary.csv: checks that every
/// shard 0…N−1 is there exactly once, finished, and ran the same manifest; merges the shard summaries (each sorted
/// by id) in one streaming pass, so the result is the summary an unsharded run writes; and, when shards wrote into
/// other folders, copies their item folders into the output folder (atomically, item by item).
/// </summary>
public static class BatchMerge
{
    /// <summary>One shard's output: its status, the folder it wrote into, its summary and its status file.</summary>
    private sealed record ShardOutput(BatchStatus Status, string Dir, string Summary, string StatusPath);

    /// <summary>Merges the shards found under <c>shards/</c> in each of <paramref name="inputDirectories"/> into <paramref name="outDirectory"/>.
    /// A cancelled <paramref name="cancellationToken"/> stops it before the next row (the summary is then not written).</summary>
    public static MergeResult Run(IReadOnlyList<string> inputDirectories, string? outDirectory = null, CancellationToken cancellationToken = default)
    {
        if (inputDirectories.Count == 0) throw new InputException("merge needs at least one batch output folder");
        var inputs = inputDirectories.Select(Path.GetFullPath).Distinct().ToList();
        var outDir = Path.GetFullPath(outDirectory ?? inputs[0]);
        var warnings = new List<string>();
        var shards = CheckedShards(FindShards(inputs), inputs, warnings);
        var n = shards[0].Status.Shard.Count;

        Directory.CreateDirectory(BatchLayout.Items(outDir));
        var staging = Path.Combine(outDir, BatchLayout.StagingFolder, "merge");
        if (Directory.Exists(staging)) Directory.Delete(staging, recursive: true);
        Directory.CreateDirectory(staging);

        long rows = 0, ok = 0, failed = 0, copied = 0;
        IEnumerable<SummaryRow> Merged()
        {
            foreach (var (row, k) in MergedRows(shards, n, cancellationToken))
            {
                cancellationToken.ThrowIfCancellationRequested();
                rows++;
                if (row.Status == ItemStatus.Ok) ok++;
                else failed++;
                if (shards[k].Dir != outDir && CopyItem(shards[k].Dir, outDir, row.Id, staging)) copied++;
                yield return row;
            }
        }

        var summaryPath = Path.Combine(outDir, BatchLayout.SummaryFile);
        SummaryTable.Write(summaryPath, Merged());

        var first = shards[0].Status;
        new BatchStatus(Shard.All, true, first.Manifest, first.ManifestSha256, first.Tool, shards.Sum(s => s.Status.Rows), ok, failed,
            shards.Sum(s => s.Status.Skipped)).Write(Path.Combine(outDir, BatchLayout.StatusFile));
        try
        {
            Directory.Delete(staging, recursive: true);
        }
        catch (IOException)
        {
            // removed by the next merge
        }

        return new MergeResult(n, rows, ok, failed, copied, summaryPath, warnings);
    }

    /// <summary>The status files under <c>shards/</c> of each folder, in name order.</summary>
    private static List<ShardOutput> FindShards(List<string> inputs)
    {
        var shards = new List<ShardOutput>();
        foreach (var dir in inputs)
        {
            if (!Directory.Exists(dir)) throw new InputException($"folder not found: {dir}", dir);
            var folder = Path.Combine(dir, BatchLayout.ShardsFolder);
            if (!Directory.Exists(folder)) continue;
            foreach (var statusPath in Directory.EnumerateFiles(folder, "shard-*-of-*.json").Order(StringComparer.Ordinal))
            {
                var status = BatchStatus.Read(statusPath);
                shards.Add(new ShardOutput(status, dir, BatchLayout.Summary(dir, status.Shard), statusPath));
            }
        }

        return shards;
    }

    /// <summary>The shards of one split, each once, all finished, of one manifest, in shard order; InputException otherwise.</summary>
    private static List<ShardOutput> CheckedShards(List<ShardOutput> shards, List<string> inputs, List<string> warnings)
    {
        if (shards.Count == 0)
            throw new InputException($"no shard outputs (shards/shard-i-of-N.json) in {string.Join(", ", inputs)}; run '{Hint.Command("batch MANIFEST --out DIR --shard i/N")}' first");
        var counts = shards.Select(s => s.Status.Shard.Count).Distinct().ToList();
        if (counts.Count > 1)
            throw new InputException($"the shards come from runs split into different numbers of shards ({string.Join(", ", counts.Order())}); merge the shards of one split only");
        var n = counts[0];
        foreach (var g in shards.GroupBy(s => s.Status.Shard.Index).Where(g => g.Count() > 1))
            throw new InputException($"shard {g.Key}/{n} is present {g.Count()} times ({string.Join(", ", g.Select(s => s.StatusPath))})");
        var missing = Enumerable.Range(0, n).Except(shards.Select(s => s.Status.Shard.Index)).ToList();
        if (missing.Count > 0)
            throw new InputException($"shard(s) {string.Join(", ", missing.Select(i => $"{i}/{n}"))} missing: {shards.Count} of {n} shard outputs found; run the missing ones (same manifest, --shard i/{n}) first");
        var unfinished = shards.Where(s => !s.Status.Complete).ToList();
        if (unfinished.Count > 0)
            throw new InputException($"shard(s) {string.Join(", ", unfinished.Select(s => s.Status.Shard))} were interrupted before they finished; run them again (finished items are skipped) and merge afterwards", unfinished[0].StatusPath);
        if (shards.Select(s => s.Status.ManifestSha256).Distinct().Count() > 1)
            throw new InputException("the shards ran different manifests (their manifest SHA-256 differ); merge the shards of one batch only");
        if (shards.Select(s => s.Status.Tool).Distinct().Count() > 1)
            warnings.Add($"the shards were run by different tool builds ({string.Join(", ", shards.Select(s => s.Status.Tool).Distinct())})");
        return shards.OrderBy(s => s.Status.Shard.Index).ToList();
    }

    /// <summary>
    /// The rows of the shard summaries (each sorted by id) in id order, with the shard each came from: one streaming
    /// k-way merge. A shard summary out of order, or an id in two shards, is an InputException.
    /// </summary>
    private static IEnumerable<(SummaryRow Row, int Shard)> MergedRows(List<ShardOutput> shards, int n, CancellationToken cancellationToken)
    {
        var readers = new List<IEnumerator<SummaryRow>>();
        try
        {
            var queue = new PriorityQueue<int, string>(ItemId.Order);
            for (var k = 0; k < shards.Count; k++)
            {
                if (!File.Exists(shards[k].Summary)) throw new InputException($"shard summary not found: {shards[k].Summary}", shards[k].StatusPath);
                readers.Add(SummaryTable.Read(shards[k].Summary, cancellationToken).GetEnumerator());
                if (readers[k].MoveNext()) queue.Enqueue(k, readers[k].Current.Id);
            }

            string? previous = null;
            var previousShard = -1;
            while (queue.TryDequeue(out var k, out var id))
            {
                if (previous is not null && ItemId.Order.Compare(previous, id) >= 0)
                    throw new InputException(previous == id
                        ? $"item \"{id}\" is in shard {previousShard}/{n} and shard {k}/{n}: the shards are not disjoint"
                        : $"the summary of shard {k}/{n} is not sorted by id (\"{id}\" after \"{previous}\")", shards[k].Summary);
                yield return (readers[k].Current, k);
                previous = id;
                previousShard = k;
                if (readers[k].MoveNext()) queue.Enqueue(k, readers[k].Current.Id);
            }
        }
        finally
        {
            foreach (var r in readers) r.Dispose();
        }
    }

    /// <summary>Copies one item folder into the output folder unless the same record is there already.</summary>
    private static bool CopyItem(string fromDir, string outDir, string id, string staging)
    {
        var source = BatchLayout.Item(fromDir, id);
        var record = ItemRecord.TryRead(Path.Combine(source, BatchLayout.DoneFile))
                     ?? throw new InputException($"item folder {source} has no readable {BatchLayout.DoneFile}, but the shard summary lists it", source);
        var target = BatchLayout.Item(outDir, id);
        var there = ItemRecord.TryRead(Path.Combine(target, BatchLayout.DoneFile));
        if (there is not null && there.Key == record.Key) return false;
        var stage = Path.Combine(staging, id);
        if (Directory.Exists(stage)) Directory.Delete(stage, recursive: true);
        Directory.CreateDirectory(stage);
        // done.json last, as in a batch run
        foreach (var file in Directory.EnumerateFiles(source).Where(f => Path.GetFileName(f) != BatchLayout.DoneFile))
            File.Copy(file, Path.Combine(stage, Path.GetFileName(file)));
        File.Copy(Path.Combine(source, BatchLayout.DoneFile), Path.Combine(stage, BatchLayout.DoneFile));
        BatchPublisher.Publish(stage, target, staging);
        return true;
    }
}
