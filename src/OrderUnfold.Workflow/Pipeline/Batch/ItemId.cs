namespace OrderUnfold.Pipeline.Batch;

/// <summary>
/// Item ids: each names a folder under <c>items/</c>, so only characters that are safe as a folder name on
/// every common file system are accepted. Rows whose id is not acceptable get a stand-in name that no valid
/// id can take (it starts with '@').
/// </summary>
public static class ItemId
{
    /// <summary>Longest accepted id.</summary>
    public const int MaxLength = 100;

    private static readonly HashSet<string> Reserved = new(StringComparer.OrdinalIgnoreCase)
    {
        "con", "prn", "aux", "nul", "com1", "com2", "com3", "com4", "com5", "com6", "com7", "com8", "com9",
        "lpt1", "lpt2", "lpt3", "lpt4", "lpt5", "lpt6", "lpt7", "lpt8", "lpt9",
    };

    /// <summary>Null when <paramref name="id"/> is acceptable, else why not.</summary>
    public static string? Problem(string id)
    {
        const string rule = "use letters, digits, '.', '_' and '-', start with a letter or digit, at most 100 characters";
        if (id.Length == 0) return $"the id is empty; every row needs one ({rule})";
        if (id.Length > MaxLength) return $"the id is {id.Length} characters long; {rule}";
        if (!char.IsAsciiLetterOrDigit(id[0])) return $"id \"{id}\" is not a safe folder name: {rule}";
        foreach (var ch in id)
            if (!(char.IsAsciiLetterOrDigit(ch) || ch is '.' or '_' or '-'))
                return $"id \"{id}\" is not a safe folder name (it holds '{ch}'): {rule}";
        if (id.EndsWith('.')) return $"id \"{id}\" ends with '.', which some file systems drop: {rule}";
        var stem = id.Split('.')[0];
        if (Reserved.Contains(stem)) return $"id \"{id}\" is a reserved device name on Windows; choose another";
        return null;
    }

    /// <summary>The folder name for a row whose id was not accepted: <c>@line-0000042</c> (manifest line number).</summary>
    public static string ForRejectedRow(long line) => $"@line-{line:D7}";

    /// <summary>FNV-1a, 64 bit, over the UTF-8 bytes of <paramref name="text"/>: the same value in every process and on every machine.</summary>
    public static ulong StableHash(string text)
    {
        const ulong offset = 14695981039346656037UL;
        const ulong prime = 1099511628211UL;
        var h = offset;
        Span<byte> buffer = stackalloc byte[4];
        foreach (var rune in text.EnumerateRunes())
        {
            var n = rune.EncodeToUtf8(buffer);
            for (var i = 0; i < n; i++)
            {
                h ^= buffer[i];
                h *= prime;
            }
        }

        return h;
    }

    /// <summary>Ordinal (byte order) comparison: the order of summary rows.</summary>
    public static readonly StringComparer Order = StringComparer.Ordinal;
}

/// <summary>
/// A share of a batch: item i of every N (0-based, 0 ≤ i &lt; N), by <see cref="ItemId.StableHash"/> of the id mod N.
/// Every id belongs to exactly one shard, whatever the order or the number of rows.
/// </summary>
/// <param name="Index">0-based shard index.</param>
/// <param name="Count">Number of shards.</param>
public sealed record Shard(int Index, int Count)
{
    /// <summary>The whole batch (one shard).</summary>
    public static Shard All { get; } = new(0, 1);

    /// <summary>True when this shard is the whole batch.</summary>
    public bool IsAll => Count == 1;

    /// <summary>True when the row with this id text belongs to this shard.</summary>
    public bool Contains(string idText) => Count == 1 || (int)(ItemId.StableHash(idText) % (ulong)Count) == Index;

    /// <summary>"i/N".</summary>
    public override string ToString() => $"{Index}/{Count}";

    /// <summary>Reads "i/N" with 0 ≤ i &lt; N (the index the schedulers' array variables give); InputException otherwise.</summary>
    public static Shard Parse(string text)
    {
        var parts = text.Split('/');
        if (parts.Length != 2 || !int.TryParse(parts[0].Trim(), System.Globalization.NumberStyles.None, System.Globalization.CultureInfo.InvariantCulture, out var i)
                              || !int.TryParse(parts[1].Trim(), System.Globalization.NumberStyles.None, System.Globalization.CultureInfo.InvariantCulture, out var n))
            throw new InputException($"--shard expects \"i/N\" with whole numbers (0-based index i, count N), e.g. \"0/4\", but got \"{text}\"");
        if (n < 1) throw new InputException($"--shard: the number of shards must be at least 1 but got {n} (in \"{text}\")");
        if (i >= n) throw new InputException($"--shard: the index is 0-based and must be below the count ({n}) but got {i} (in \"{text}\"); with Slurm arrays use --array=0-{n - 1}");
        return new Shard(i, n);
    }

    /// <summary>File-name tag: <c>shard-2-of-8</c>, or <c>all</c>.</summary>
    public string Tag => IsAll ? "all" : $"shard-{Index}-of-{Count}";
}
