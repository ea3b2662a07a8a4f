using System.Globalization;
using System.Text.RegularExpressions;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>One data row of a batch manifest, as read (paths not yet resolved).</summary>
/// <param name="Line">1-based line number in the manifest.</param>
/// <param name="IdText">The id as written (may be unacceptable; see <see cref="Problem"/>).</param>
/// <param name="Setup">Setup file (relative to the manifest's folder), or null for the batch default.</param>
/// <param name="Files">Sweep files replacing the setup's [[sweep]] files in order, or null to keep them.</param>
/// <param name="Calibration">Calibration file to reuse (relative to the manifest's folder), or null for the batch default.</param>
/// <param name="Timestamp">Normalised UTC time stamp (ISO 8601), or null.</param>
/// <param name="Problem">Why the row cannot be run, or null. A row with a problem becomes a failed item.</param>
/// <param name="IdAccepted">True when <see cref="IdText"/> is a valid id (the item gets that folder).</param>
public sealed record ManifestRow(long Line, string IdText, string? Setup, IReadOnlyList<string>? Files, string? Calibration,
    string? Timestamp, string? Problem, bool IdAccepted)
{
    /// <summary>Folder name under <c>items/</c> and summary id: the id, or <c>@line-NNNNNNN</c> when it was not accepted.</summary>
    public string Folder => IdAccepted ? IdText : ItemId.ForRejectedRow(Line);
}

/// <summary>
/// Reads a batch manifest: CSV with a header row, one item per line, read line by line (a manifest of
/// millions of rows is never held in memory). Columns (header names, any order, case-insensitive):
/// <list type="table">
/// <item><term>id</term><description>required; unique; letters, digits, '.', '_', '-' (it names the item's folder)</description></item>
/// <item><term>setup</term><description>setup file, relative to the manifest; empty: the batch's --setup</description></item>
/// <item><term>files</term><description>sweep files separated by ';', replacing the setup's [[sweep]] files in order; empty: keep them</description></item>
/// <item><term>calibration</term><description>calibration JSON to reuse (no calibration sweeps are read); empty: the batch's --calibration, or calibrate from the setup</description></item>
/// <item><term>timestamp</term><description>optional ISO 8601 time (2025-03-14T09:00:05Z; without an offset it is taken as UTC)</description></item>
/// </list>
/// Blank lines and lines starting with '#' are skipped. A bad header is an <see cref="InputException"/>;
/// a bad row is returned with its <see cref="ManifestRow.Problem"/> set.
/// </summary>
public static class Manifest
{
    /// <summary>The accepted column names.</summary>
    public static IReadOnlyList<string> Columns { get; } = ["id", "setup", "files", "calibration", "timestamp"];

    private static readonly Regex IsoTime = new(
        @"^[0-9]{4}-[0-9]{2}-[0-9]{2}([T ][0-9]{2}:[0-9]{2}(:[0-9]{2}(\.[0-9]{1,7})?)?)?(Z|[+-][0-9]{2}:?[0-9]{2})?$", RegexOptions.CultureInvariant | RegexOptions.Compiled);

    /// <summary>Streams the rows of the manifest at <paramref name="path"/>, checking <paramref name="cancellationToken"/> as it reads.</summary>
    public static IEnumerable<ManifestRow> Read(string path, CancellationToken cancellationToken = default)
    {
        if (string.IsNullOrWhiteSpace(path)) throw new InputException("expected the path of a manifest (CSV) but got an empty name");
        return ReadLines(path, Io.InputLimits.ReadLines(path, "manifest", cancellationToken)); // type, size and line-length limits
    }

    /// <summary>Streams the rows of manifest text given as lines (<paramref name="path"/> names it in messages).</summary>
    public static IEnumerable<ManifestRow> ReadLines(string path, IEnumerable<string> lines)
    {
        Dictionary<string, int>? columns = null;
        int headerCount = 0;
        long n = 0;
        foreach (var raw in lines)
        {
            n++;
            var line = n == 1 ? raw.TrimStart('\uFEFF') : raw;
            if (line.Length == 0 || line.TrimStart().StartsWith('#') || line.Trim().Length == 0) continue;
            if (columns is null)
            {
                columns = Header(line, path, n);
                headerCount = columns.Count;
                continue;
            }

            yield return Row(line, n, columns, headerCount);
        }

        if (columns is null)
            throw new InputException($"the manifest has no header row; expected a first line naming the columns, e.g. \"id,files,timestamp\" (accepted: {string.Join(", ", Columns)})", path);
    }

    private static Dictionary<string, int> Header(string line, string path, long n)
    {
        if (!CsvLine.TrySplit(line, out var fields, out var error)) throw new InputException($"header row: {error}", path, (int)n);
        var map = new Dictionary<string, int>(StringComparer.OrdinalIgnoreCase);
        for (var i = 0; i < fields.Count; i++)
        {
            var name = fields[i].Trim();
            if (!Columns.Contains(name, StringComparer.OrdinalIgnoreCase))
                throw new InputException($"unknown column \"{name}\" in the header; accepted columns: {string.Join(", ", Columns)}", path, (int)n, i + 1);
            if (!map.TryAdd(name.ToLowerInvariant(), i))
                throw new InputException($"column \"{name}\" appears twice in the header", path, (int)n, i + 1);
        }

        if (!map.ContainsKey("id"))
            throw new InputException($"the header has no \"id\" column; expected it among: {string.Join(", ", fields)} (every row needs an id)", path, (int)n);
        return map;
    }

    private static ManifestRow Row(string line, long n, Dictionary<string, int> columns, int headerCount)
    {
        if (!CsvLine.TrySplit(line, out var fields, out var error))
            return new ManifestRow(n, RawId(line), null, null, null, null, error, false);
        string? Get(string name) => columns.TryGetValue(name, out var i) && i < fields.Count && fields[i].Length > 0 ? fields[i] : null;
        var id = Get("id") ?? "";
        var idProblem = ItemId.Problem(id);
        if (fields.Count > headerCount)
            return new ManifestRow(n, id, null, null, null, null, $"the row has {fields.Count} fields but the header names {headerCount} columns (quote fields that hold commas)", false);
        if (idProblem is not null) return new ManifestRow(n, id, null, null, null, null, idProblem, false);

        string? problem = null;
        IReadOnlyList<string>? files = null;
        if (Get("files") is string list)
        {
            files = list.Split(';', StringSplitOptions.TrimEntries);
            if (files.Any(f => f.Length == 0)) problem = $"files: an empty entry in \"{list}\"; expected file names separated by ';'";
        }

        string? stamp = null;
        if (Get("timestamp") is string t)
        {
            if (TryParseTimestamp(t, out var when)) stamp = FormatTimestamp(when);
            else problem ??= $"timestamp: expected ISO 8601 such as 2025-03-14T09:00:05Z but got \"{t}\"";
        }

        return new ManifestRow(n, id, Get("setup"), files, Get("calibration"), stamp, problem, true);
    }

    /// <summary>The first field of a line that could not be split (for messages and sharding only).</summary>
    private static string RawId(string line)
    {
        var comma = line.IndexOf(',');
        return (comma < 0 ? line : line[..comma]).Trim().Trim('"');
    }

    /// <summary>Reads an ISO 8601 date or date-time; no offset means UTC.</summary>
    public static bool TryParseTimestamp(string text, out DateTimeOffset value)
    {
        value = default;
        var t = text.Trim();
        if (!IsoTime.IsMatch(t)) return false;
        return DateTimeOffset.TryParse(t, CultureInfo.InvariantCulture, DateTimeStyles.AssumeUniversal | DateTimeStyles.AdjustToUniversal, out value);
    }

    /// <summary>UTC, ISO 8601, fractional seconds only when present: 2025-03-14T09:00:05Z.</summary>
    public static string FormatTimestamp(DateTimeOffset value) =>
        value.ToUniversalTime().ToString("yyyy-MM-dd'T'HH:mm:ss.FFFFFFF'Z'", CultureInfo.InvariantCulture);
}
