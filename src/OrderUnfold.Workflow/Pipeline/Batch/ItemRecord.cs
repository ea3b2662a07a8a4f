using System.Text.Json;
using System.Text.Json.Serialization;
using OrderUnfold.Io;
using OrderUnfold.Outputs;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>Outcome of one item.</summary>
public enum ItemStatus
{
    /// <summary>Unfolded; outputs written.</summary>
    Ok,

    /// <summary>Could not be unfolded (bad row, unreadable file, ...): the error says why.</summary>
    Failed,
}

/// <summary>
/// What one item's <c>done.json</c> holds: written last into the item's folder, so its presence (with a key
/// that matches the item's inputs) means the item is finished. The summary is built from these records.
/// </summary>
public sealed record ItemRecord
{
    /// <summary>The <c>format</c> every done.json carries.</summary>
    public const string FormatName = "orderunfold-batch-item";

    /// <summary>The <c>version</c> of this layout; a record of another version counts as not done.</summary>
    public const int CurrentVersion = 1;

    /// <summary>Always <see cref="FormatName"/> (first in the file).</summary>
    [JsonPropertyOrder(-2)]
    public string Format { get; init; } = FormatName;

    /// <summary>Always <see cref="CurrentVersion"/> when written by this build.</summary>
    [JsonPropertyOrder(-1)]
    public int Version { get; init; } = CurrentVersion;

    /// <summary>Folder name (the id, or <c>@line-NNNNNNN</c> for a row whose id was not accepted).</summary>
    public required string Id { get; init; }

    /// <summary>SHA-256 (hex) over inputs, setup text, calibration, settings and tool version.</summary>
    public required string Key { get; init; }

    public required ItemStatus Status { get; init; }

    /// <summary>1-based manifest line the item came from.</summary>
    public long ManifestLine { get; init; }

    /// <summary>Normalised UTC time stamp, or null.</summary>
    public string? Timestamp { get; init; }

    /// <summary>Number of lines found.</summary>
    public int? Lines { get; init; }

    /// <summary>Position of the strongest line on the first sweep's calibrated scan axis, modulo that cavity's FSR, Hz (−φ₁).</summary>
    public double? StrongestLineHz { get; init; }

    /// <summary>FSR of the first sweep's cavity (the period of <see cref="StrongestLineHz"/>), Hz.</summary>
    public double? FrameFsrHz { get; init; }

    /// <summary>True when orders were resolved (two or more cavities); false: frequencies are folded into one FSR.</summary>
    public bool? OrdersResolved { get; init; }

    /// <summary>Reduced χ² over all sweeps of the item.</summary>
    public double? ReducedChi2 { get; init; }

    /// <summary>Number of warnings of the run.</summary>
    public int Warnings { get; init; }

    /// <summary>Wall-clock seconds the item took (timing: differs from run to run).</summary>
    public double Seconds { get; init; }

    /// <summary>Why the item failed, or null.</summary>
    public string? Error { get; init; }

    /// <summary>Values from the <see cref="IItemAnalysis"/>, by column name.</summary>
    public IReadOnlyDictionary<string, string> Analysis { get; init; } = new Dictionary<string, string>();

    /// <summary>The record as JSON text (done.json), through the outputs' serialiser: no NaN (null instead), seconds to
    /// 0.1 ms, the analysis values in ordinal key order.</summary>
    public string ToJson() => OutputJson.Serialize(this with
    {
        StrongestLineHz = OutputJson.Finite(StrongestLineHz),
        FrameFsrHz = OutputJson.Finite(FrameFsrHz),
        ReducedChi2 = OutputJson.Finite(ReducedChi2),
        Seconds = Math.Round(Seconds, 4),
        Analysis = new SortedDictionary<string, string>(Analysis.ToDictionary(p => p.Key, p => p.Value), StringComparer.Ordinal),
    }, c => c.ItemRecord);

    /// <summary>Writes the record atomically (or, with <paramref name="staged"/>, into a staging folder published as a whole).</summary>
    public void Write(string path, bool staged = false) => AtomicFile.WriteAllText(path, ToJson(), staged);

    /// <summary>Reads a record; null when the file is missing or is not a readable record (the item then counts as not done).</summary>
    public static ItemRecord? TryRead(string path)
    {
        try
        {
            if (!File.Exists(path)) return null;
            return Parse(File.ReadAllText(path));
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or JsonException or InvalidOperationException or FormatException or KeyNotFoundException or NullReferenceException)
        {
            return null;
        }
    }

    /// <summary>Parses record text; throws on anything that is not a record of this version.</summary>
    public static ItemRecord Parse(string json)
    {
        var o = JsonSerializer.Deserialize(json, OutputJson.Context.ItemRecord) ?? throw new FormatException("not a batch item record");
        if (o.Format != FormatName || o.Version != CurrentVersion) throw new FormatException("not a batch item record of this version");
        return o;
    }
}
