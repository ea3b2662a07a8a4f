namespace OrderUnfold.Pipeline.Batch;

/// <summary>
/// done.json as written and read (through <see cref="Outputs.OutputJson"/>, like every other JSON output): the fields of
/// an <see cref="ItemRecord"/> after its format name and version, in this order.
/// </summary>
public sealed record ItemRecordFile
{
    /// <summary>Always <see cref="ItemRecord.Format"/>.</summary>
    public string Format { get; init; } = ItemRecord.Format;

    /// <summary>Always <see cref="ItemRecord.Version"/>; a record of another version counts as not done.</summary>
    public int Version { get; init; } = ItemRecord.Version;

    /// <summary>See <see cref="ItemRecord.Id"/>.</summary>
    public required string Id { get; init; }

    /// <summary>See <see cref="ItemRecord.Key"/>.</summary>
    public required string Key { get; init; }

    /// <summary>See <see cref="ItemRecord.Status"/>.</summary>
    public required ItemStatus Status { get; init; }

    /// <summary>See <see cref="ItemRecord.ManifestLine"/>.</summary>
    public long ManifestLine { get; init; }

    /// <summary>See <see cref="ItemRecord.Timestamp"/>.</summary>
    public string? Timestamp { get; init; }

    /// <summary>See <see cref="ItemRecord.Lines"/>.</summary>
    public int? Lines { get; init; }

    /// <summary>See <see cref="ItemRecord.StrongestLineHz"/>.</summary>
    public double? StrongestLineHz { get; init; }

    /// <summary>See <see cref="ItemRecord.FrameFsrHz"/>.</summary>
    public double? FrameFsrHz { get; init; }

    /// <summary>See <see cref="ItemRecord.OrdersResolved"/>.</summary>
    public bool? OrdersResolved { get; init; }

    /// <summary>See <see cref="ItemRecord.ReducedChi2"/>.</summary>
    public double? ReducedChi2 { get; init; }

    /// <summary>See <see cref="ItemRecord.Warnings"/>.</summary>
    public int Warnings { get; init; }

    /// <summary>See <see cref="ItemRecord.Seconds"/> (rounded to 0.1 ms).</summary>
    public double Seconds { get; init; }

    /// <summary>See <see cref="ItemRecord.Error"/>.</summary>
    public string? Error { get; init; }

    /// <summary>See <see cref="ItemRecord.Analysis"/>; keys in ordinal order.</summary>
    public SortedDictionary<string, string> Analysis { get; init; } = new(StringComparer.Ordinal);
}

/// <summary>batch.json (or a shard's status file) as written and read: a <see cref="BatchStatus"/> after its format name
/// and version.</summary>
public sealed record BatchStatusFile
{
    /// <summary>Always <see cref="BatchStatus.Format"/>.</summary>
    public string Format { get; init; } = BatchStatus.Format;

    /// <summary>Version of the layout (1).</summary>
    public int Version { get; init; } = 1;

    /// <summary>0-based index of the shard.</summary>
    public int ShardIndex { get; init; }

    /// <summary>Number of shards.</summary>
    public int ShardCount { get; init; }

    /// <summary>See <see cref="BatchStatus.Complete"/>.</summary>
    public bool Complete { get; init; }

    /// <summary>See <see cref="BatchStatus.Manifest"/>.</summary>
    public required string Manifest { get; init; }

    /// <summary>See <see cref="BatchStatus.ManifestSha256"/>.</summary>
    public required string ManifestSha256 { get; init; }

    /// <summary>See <see cref="BatchStatus.Tool"/>.</summary>
    public required string Tool { get; init; }

    /// <summary>See <see cref="BatchStatus.Rows"/>.</summary>
    public long Rows { get; init; }

    /// <summary>See <see cref="BatchStatus.Ok"/>.</summary>
    public long Ok { get; init; }

    /// <summary>See <see cref="BatchStatus.Failed"/>.</summary>
    public long Failed { get; init; }

    /// <summary>See <see cref="BatchStatus.Skipped"/>.</summary>
    public long Skipped { get; init; }
}
