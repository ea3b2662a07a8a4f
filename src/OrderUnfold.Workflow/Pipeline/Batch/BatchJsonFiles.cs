namespace OrderUnfold.Pipeline.Batch;

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
