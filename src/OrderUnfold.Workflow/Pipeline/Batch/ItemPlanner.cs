using System.Collections.Concurrent;
using System.Security.Cryptography;
using System.Text;
using OrderUnfold.Calibration;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>
/// What one manifest row runs with: the setup (with the row's sweep files), the calibration, and the item key — a
/// SHA-256 over the tool, the settings, the row and the state of every input file — that decides whether a finished
/// item can be skipped.
/// </summary>
internal static class ItemPlanner
{
    /// <summary>At most this many parsed setups and calibrations are kept (a manifest may name millions).</summary>
    private const int CacheLimit = 64;

    /// <summary>The setup and calibration an item runs with, its key, or why it cannot run.</summary>
    internal sealed record ItemPlan(Setup? Setup, CalibrationSet? Calibration, string Key, string? Error);

    /// <summary>Resolves a manifest row: its setup (with the row's files), calibration, key, or why it cannot run
    /// (InputException for an unreadable setup or calibration, caught by the caller).</summary>
    public static ItemPlan Make(ManifestRow row, BatchContext ctx, string manifest)
    {
        var where = $"{manifest}:{row.Line}";
        if (row.Problem is not null)
            return new ItemPlan(null, null, Key(ctx, row.Folder, row.Timestamp, ["row-problem " + row.Problem]), $"{where}: {row.Problem}");

        var setupPath = row.Setup is not null ? Path.GetFullPath(Path.Combine(ctx.ManifestDir, row.Setup)) : ctx.DefaultSetup;
        // files named in the manifest stay in its folder unless --allow-outside-paths (Io/InputLimits.cs)
        foreach (var named in new[] { row.Setup, row.Calibration }.Concat(row.Files ?? []))
            if (named is not null && InputLimits.OutsideMessage(Path.Combine(ctx.ManifestDir, named), ctx.ManifestDir, manifest) is string outside)
                return new ItemPlan(null, null, Key(ctx, row.Folder, row.Timestamp, ["outside " + named]), $"{where}: {outside}");
        if (setupPath is null)
            return new ItemPlan(null, null, Key(ctx, row.Folder, row.Timestamp, ["no-setup"]), $"{where}: no setup: give the row a setup column value or the batch a --setup");
        var (setup, setupSha) = Cached(ctx.Setups, setupPath, () =>
        {
            if (!File.Exists(setupPath)) throw new InputException($"setup file not found: {setupPath}", where);
            var text = InputLimits.ReadAllText(setupPath, "setup file");
            return (SetupReader.ReadText(text, setupPath), Sha256Hex(Encoding.UTF8.GetBytes(text)));
        });

        var parts = new List<string> { "setup " + setupSha };
        if (row.Files is { } files)
        {
            if (files.Count != setup.Sweeps.Count)
                return new ItemPlan(null, null, Key(ctx, row.Folder, row.Timestamp, [.. parts, "files " + string.Join(";", files)]),
                    $"{where}: files lists {files.Count} file(s) but the setup {setupPath} has {setup.Sweeps.Count} [[sweep]] table(s); expected one file per [[sweep]], in order, separated by ';'");
            setup = setup with
            {
                Sweeps = setup.Sweeps.Select((s, i) => s with { File = s.File with { Path = Path.GetFullPath(Path.Combine(ctx.ManifestDir, files[i])) } }).ToList(),
            };
        }

        if (ctx.Options.NoRefine && setup.Solve.Refine) setup = setup with { Solve = setup.Solve with { Refine = false } };
        var calibrationPath = row.Calibration is not null ? Path.GetFullPath(Path.Combine(ctx.ManifestDir, row.Calibration)) : ctx.DefaultCalibration;
        CalibrationSet? calibration = null;
        string? missing = null;
        if (calibrationPath is not null)
        {
            if (!File.Exists(calibrationPath))
            {
                missing = $"calibration file not found: {calibrationPath}";
                parts.Add("calibration missing " + calibrationPath);
            }
            else
            {
                var (set, sha) = Cached(ctx.Calibrations, calibrationPath, () => (SavedCalibration.Read(calibrationPath), Sha256OfFile(calibrationPath)));
                calibration = set;
                parts.Add("calibration " + sha);
            }
        }
        else
        {
            foreach (var c in setup.Calibrations) parts.Add("calibration-sweep " + FileState(c.File.Path));
        }

        foreach (var s in setup.Sweeps)
        {
            var state = FileState(s.File.Path);
            parts.Add("sweep " + state);
            if (missing is null && !state.StartsWith("sha256 ", StringComparison.Ordinal)) missing = $"sweep file {state}";
        }

        var key = Key(ctx, row.Folder, row.Timestamp, parts);
        return missing is not null ? new ItemPlan(null, null, key, $"{where}: {missing}") : new ItemPlan(setup, calibration, key, null);
    }

    /// <summary>"sha256 HEX" of a file, or why it has none ("not found: PATH", "unreadable: ...").</summary>
    private static string FileState(string path)
    {
        try
        {
            if (!File.Exists(path)) return $"not found: {path}";
            InputLimits.CheckFile(path, "sweep file");
            return "sha256 " + Sha256OfFile(path);
        }
        catch (InputException e)
        {
            return $"unreadable: {e.Message}";
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            return $"unreadable: {path}: {e.Message}";
        }
    }

    private static T Cached<T>(ConcurrentDictionary<string, Lazy<T>> cache, string key, Func<T> load)
    {
        if (cache.Count > CacheLimit) cache.Clear();
        return cache.GetOrAdd(key, _ => new Lazy<T>(load, LazyThreadSafetyMode.ExecutionAndPublication)).Value;
    }

    /// <summary>SHA-256 (hex) over the tool, settings, item and input states.</summary>
    internal static string Key(BatchContext ctx, string folder, string? timestamp, IEnumerable<string> parts)
    {
        var sb = new StringBuilder("orderunfold-batch-key 1\n");
        sb.Append("tool ").Append(ctx.Tool).Append('\n');
        sb.Append("analysis ").Append(ctx.Analysis.Identity).Append('\n');
        sb.Append("plots ").Append(ctx.Options.Figures is not null ? "yes" : "no").Append('\n');
        sb.Append("refine ").Append(ctx.Options.NoRefine ? "off" : "setup").Append('\n');
        sb.Append("id ").Append(folder).Append('\n');
        sb.Append("timestamp ").Append(timestamp ?? "-").Append('\n');
        foreach (var p in parts) sb.Append(p).Append('\n');
        return Sha256Hex(Encoding.UTF8.GetBytes(sb.ToString()));
    }

    internal static string Sha256OfFile(string path)
    {
        using var s = File.OpenRead(path);
        return Convert.ToHexStringLower(SHA256.HashData(s));
    }

    private static string Sha256Hex(byte[] bytes) => Convert.ToHexStringLower(SHA256.HashData(bytes));
}
