using System.Collections.Concurrent;

namespace OrderUnfold.Io;

/// <summary>
/// An output folder that is complete or absent: a command writes into a hidden staging folder beside the target
/// (<c>.NAME.partial-PID-ID</c>) and <see cref="Publish"/> moves it into place once everything is written. A run that
/// fails, is cancelled or is stopped before publishing removes the staging folder (<see cref="Dispose"/>, or
/// <see cref="RemoveUnpublished"/> when the process is made to exit), so the target is never half-written.
/// </summary>
public sealed class StagedFolder : IDisposable
{
    private static readonly ConcurrentDictionary<string, byte> Active = new(StringComparer.Ordinal);
    private bool _published;

    private StagedFolder(string target, string staging)
    {
        Target = target;
        Path = staging;
    }

    /// <summary>Where the outputs finally go.</summary>
    public string Target { get; }

    /// <summary>The staging folder to write into.</summary>
    public string Path { get; }

    /// <summary>Creates the staging folder for <paramref name="target"/> (its parent folder is created if needed).</summary>
    public static StagedFolder Create(string target)
    {
        var full = System.IO.Path.GetFullPath(target);
        if (File.Exists(full)) throw new InputException($"the output folder {full} is an existing file; choose another --out", target);
        var parent = System.IO.Path.GetDirectoryName(full.TrimEnd(System.IO.Path.DirectorySeparatorChar)) ?? ".";
        var name = System.IO.Path.GetFileName(full.TrimEnd(System.IO.Path.DirectorySeparatorChar));
        Directory.CreateDirectory(parent);
        var staging = System.IO.Path.Combine(parent, $".{name}.partial-{Environment.ProcessId}-{Guid.NewGuid().ToString("N")[..8]}");
        Directory.CreateDirectory(staging);
        Active[staging] = 0;
        return new StagedFolder(full, staging);
    }

    /// <summary>The published path of a file written in the staging folder.</summary>
    public string Final(string stagedPath) =>
        System.IO.Path.Combine(Target, System.IO.Path.GetRelativePath(Path, System.IO.Path.GetFullPath(stagedPath)));

    /// <summary>
    /// Flushes the staged files to disk and moves them into <see cref="Target"/>. A target that does not exist (or is
    /// empty) is replaced by the staging folder in one rename; into an existing folder the files are moved one by one,
    /// <paramref name="completeMarker"/> (for example report.json) removed first and moved last, so its presence still
    /// means the folder is complete. A cancelled <paramref name="cancellationToken"/> (a stopping run) publishes nothing:
    /// <see cref="OperationCanceledException"/>, and disposing the folder removes what was staged.
    /// </summary>
    public void Publish(string? completeMarker = null, CancellationToken cancellationToken = default)
    {
        cancellationToken.ThrowIfCancellationRequested();
        foreach (var file in Directory.EnumerateFiles(Path, "*", SearchOption.AllDirectories)) AtomicFile.FlushToDisk(file);
        if (Directory.Exists(Target) && !Directory.EnumerateFileSystemEntries(Target).Any()) Directory.Delete(Target);
        if (!Directory.Exists(Target))
        {
            Directory.Move(Path, Target);
        }
        else
        {
            var marker = completeMarker is null ? null : System.IO.Path.Combine(Target, completeMarker);
            if (marker is not null && File.Exists(marker)) File.Delete(marker);
            foreach (var entry in Directory.EnumerateFileSystemEntries(Path).OrderBy(e => System.IO.Path.GetFileName(e) == completeMarker))
            {
                var to = System.IO.Path.Combine(Target, System.IO.Path.GetFileName(entry));
                if (Directory.Exists(entry))
                {
                    if (Directory.Exists(to)) Directory.Delete(to, recursive: true);
                    Directory.Move(entry, to);
                }
                else
                {
                    File.Move(entry, to, overwrite: true);
                }
            }

            Directory.Delete(Path, recursive: true);
        }

        _published = true;
        Active.TryRemove(Path, out _);
    }

    /// <summary>Removes the staging folder unless it was published.</summary>
    public void Dispose()
    {
        if (_published) return;
        TryDelete(Path);
        Active.TryRemove(Path, out _);
    }

    /// <summary>Removes every staging folder of this process that was not published (before a forced exit).</summary>
    public static void RemoveUnpublished()
    {
        foreach (var path in Active.Keys)
        {
            // moved aside first: a thread still writing into it then fails instead of refilling it while it is deleted
            var aside = path + ".removing";
            try
            {
                Directory.Move(path, aside);
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                aside = path;
            }

            for (var attempt = 0; attempt < 3 && Directory.Exists(aside); attempt++) TryDelete(aside);
        }
    }

    private static void TryDelete(string path)
    {
        try
        {
            if (Directory.Exists(path)) Directory.Delete(path, recursive: true);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            // best effort: a hidden .partial folder left behind never looks like an output
        }
    }
}
