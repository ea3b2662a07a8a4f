using System.Text;

namespace OrderUnfold.Io;

/// <summary>
/// Writes files so that a reader never sees a half-written one: the content goes to a temporary file in
/// the same folder, is flushed to disk, and is then renamed over the target (atomic on POSIX file systems).
/// </summary>
public static class AtomicFile
{
    private static readonly UTF8Encoding Utf8NoBom = new(false);

    public static void WriteAllText(string path, string content) =>
        Write(path, stream =>
        {
            var bytes = Utf8NoBom.GetBytes(content);
            stream.Write(bytes, 0, bytes.Length);
        });

    public static void WriteAllBytes(string path, byte[] content) => Write(path, s => s.Write(content, 0, content.Length));

    /// <summary>
    /// Writes a file in a staging folder that is published as a whole (renamed into place once complete): no temporary
    /// file and no flush here; whoever publishes the folder calls <see cref="FlushToDisk"/> on its files first.
    /// </summary>
    public static void WriteStaged(string path, string content)
    {
        File.WriteAllText(path, content, Utf8NoBom);
    }

    /// <summary><see cref="WriteStaged"/> when <paramref name="staged"/>, else <see cref="WriteAllText(string, string)"/>.</summary>
    public static void WriteAllText(string path, string content, bool staged)
    {
        if (staged) WriteStaged(path, content);
        else WriteAllText(path, content);
    }

    /// <summary>Forces a written file's data to disk (fsync).</summary>
    public static void FlushToDisk(string path)
    {
        using var handle = File.OpenHandle(path, FileMode.Open, FileAccess.ReadWrite);
        RandomAccess.FlushToDisk(handle);
    }

    /// <summary>Writes through a callback that receives the temporary stream.</summary>
    public static void Write(string path, Action<Stream> write)
    {
        var full = Path.GetFullPath(path);
        var dir = Path.GetDirectoryName(full)!;
        Directory.CreateDirectory(dir);
        var tmp = Path.Combine(dir, $".{Path.GetFileName(full)}.{Environment.ProcessId}.{Guid.NewGuid():N}.tmp");
        try
        {
            using (var fs = new FileStream(tmp, FileMode.CreateNew, FileAccess.Write, FileShare.None))
            {
                write(fs);
                fs.Flush(true);
            }

            File.Move(tmp, full, overwrite: true);
        }
        catch
        {
            try { File.Delete(tmp); } catch { /* best effort */ }
            throw;
        }
    }
}
