using System.Runtime.InteropServices;
using System.Text;

namespace OrderUnfold.Io;

/// <summary>
/// Limits every input file is checked against before and while it is read, and where files named inside other
/// files may lie. The command line sets them per run (<see cref="Use"/>) from <c>--max-file-size</c>,
/// <c>--max-line-length</c> and <c>--allow-outside-paths</c>; without a scope the defaults apply.
/// </summary>
public sealed record InputLimits
{
    /// <summary>Option that raises <see cref="MaxFileBytes"/>.</summary>
    public const string MaxFileSizeOption = "--max-file-size";

    /// <summary>Option that raises <see cref="MaxLineChars"/>.</summary>
    public const string MaxLineLengthOption = "--max-line-length";

    /// <summary>Option that lets setups and manifests name files outside their own folder.</summary>
    public const string AllowOutsidePathsOption = "--allow-outside-paths";

    /// <summary>Longest piece of file content a message repeats (longer cells are clipped with "…").</summary>
    public const int EchoChars = InputException.EchoChars;

    /// <summary>Largest input file read (default 256 MiB: about ten million samples of a three-column scope export).</summary>
    public long MaxFileBytes { get; init; } = 256L << 20;

    /// <summary>Longest line of a text input, in characters (default 1 Mi).</summary>
    public int MaxLineChars { get; init; } = 1 << 20;

    /// <summary>True when files named in a setup or manifest may lie outside that file's folder.</summary>
    public bool AllowOutsidePaths { get; init; }

    /// <summary>The defaults.</summary>
    public static InputLimits Default { get; } = new();

    private static readonly AsyncLocal<InputLimits?> Ambient = new();

    /// <summary>The limits of the current run (flows into tasks and threads started from it).</summary>
    public static InputLimits Current => Ambient.Value ?? Default;

    /// <summary>Sets the limits for the calling flow until the returned scope is disposed.</summary>
    public static IDisposable Use(InputLimits limits)
    {
        var previous = Ambient.Value;
        Ambient.Value = limits;
        return new Scope(() => Ambient.Value = previous);
    }

    private sealed class Scope(Action restore) : IDisposable
    {
        public void Dispose() => restore();
    }

    /// <summary>
    /// Refuses, before anything is opened, a path that does not exist, is a folder, a device, a FIFO or a socket,
    /// or is larger than <see cref="MaxFileBytes"/>. <paramref name="what"/> names the file's role in messages.
    /// </summary>
    public static void CheckFile(string path, string what = "file")
    {
        var full = Path.GetFullPath(path);
        if (Directory.Exists(full)) throw new InputException($"expected a {what} but got a folder: {full}", path);
        if (!File.Exists(full)) throw new InputException($"{what} not found: {full}", path);
        var kind = FileKind(full);
        if (kind is not null)
            throw new InputException($"expected a regular {what} but {full} is {kind}; only regular files are read", path);
        var limits = Current;
        var length = new FileInfo(full).Length;
        if (length > limits.MaxFileBytes)
            throw new InputException(
                $"the {what} is {FormatBytes(length)}, over the limit of {FormatBytes(limits.MaxFileBytes)}; " +
                $"raise it with {MaxFileSizeOption} SIZE (for example {MaxFileSizeOption} \"{FormatBytes(NextPowerOfTwo(length))}\") if the file is genuine", path);
    }

    /// <summary>Reads a whole text file after <see cref="CheckFile"/>, refusing a line longer than
    /// <see cref="MaxLineChars"/> (with its line and column) as soon as it is met; checks <paramref name="cancellationToken"/>
    /// before each block it reads.</summary>
    public static string ReadAllText(string path, string what = "file", CancellationToken cancellationToken = default)
    {
        CheckFile(path, what);
        var sb = new StringBuilder();
        foreach (var block in Blocks(path, what, cancellationToken)) sb.Append(block.Span);
        return sb.ToString();
    }

    /// <summary>Streams the lines of a text file after <see cref="CheckFile"/>, with the line-length limit; checks
    /// <paramref name="cancellationToken"/> before each block it reads.</summary>
    public static IEnumerable<string> ReadLines(string path, string what = "file", CancellationToken cancellationToken = default)
    {
        CheckFile(path, what);
        return Lines(path, what, cancellationToken);
    }

    private static IEnumerable<string> Lines(string path, string what, CancellationToken cancellationToken)
    {
        var line = new StringBuilder();
        var pendingCr = false;
        foreach (var block in Blocks(path, what, cancellationToken))
        {
            for (var i = 0; i < block.Length; i++)
            {
                var ch = block.Span[i];
                if (pendingCr)
                {
                    pendingCr = false;
                    if (ch == '\n') continue;
                }

                if (ch is '\n' or '\r')
                {
                    pendingCr = ch == '\r';
                    yield return line.ToString();
                    line.Clear();
                }
                else
                {
                    line.Append(ch);
                }
            }
        }

        if (line.Length > 0) yield return line.ToString();
    }

    private static IEnumerable<ReadOnlyMemory<char>> Blocks(string path, string what, CancellationToken cancellationToken)
    {
        var limits = Current;
        var buffer = new char[1 << 16];
        long line = 1, column = 0;
        StreamReader reader;
        try
        {
            reader = new StreamReader(new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, 1 << 16), Encoding.UTF8, detectEncodingFromByteOrderMarks: true);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new InputException($"cannot read the {what}: {e.Message}", path, inner: e);
        }

        using (reader)
        {
            long read = 0;
            while (true)
            {
                cancellationToken.ThrowIfCancellationRequested();
                int n;
                try
                {
                    n = reader.Read(buffer, 0, buffer.Length);
                }
                catch (Exception e) when (e is IOException or UnauthorizedAccessException)
                {
                    throw new InputException($"cannot read the {what}: {e.Message}", path, inner: e);
                }

                if (n == 0) yield break;
                read += n;
                // a file that grows while it is read (or a size the file system does not report) stays bounded too
                if (read > limits.MaxFileBytes)
                    throw new InputException($"the {what} holds more than the limit of {FormatBytes(limits.MaxFileBytes)}; raise it with {MaxFileSizeOption} SIZE if the file is genuine", path);
                for (var i = 0; i < n; i++)
                {
                    var ch = buffer[i];
                    if (ch == '\n' || (ch == '\r' && (i + 1 >= n || buffer[i + 1] != '\n')))
                    {
                        line++;
                        column = 0;
                    }
                    else if (ch != '\r' && ++column > limits.MaxLineChars)
                    {
                        throw new InputException(
                            $"line {line} is longer than the limit of {limits.MaxLineChars} characters (a file without line breaks, or not a text file?); " +
                            $"raise it with {MaxLineLengthOption} N if the file is genuine", path, (int)Math.Min(line, int.MaxValue), limits.MaxLineChars + 1);
                    }
                }

                yield return new ReadOnlyMemory<char>(buffer, 0, n);
            }
        }
    }

    /// <summary>
    /// Null when <paramref name="resolved"/> may be read as a file named inside <paramref name="namingFile"/> (it lies in
    /// <paramref name="folder"/> or below, or outside paths are allowed); else the refusal's text, which names the option.
    /// </summary>
    public static string? OutsideMessage(string resolved, string folder, string namingFile)
    {
        if (Current.AllowOutsidePaths) return null;
        var full = Path.GetFullPath(resolved);
        var root = Path.GetFullPath(folder);
        var inside = IsInside(full, root);
        if (inside)
        {
            // a link inside the folder must not lead out of it either
            try
            {
                var target = new FileInfo(full).ResolveLinkTarget(returnFinalTarget: true);
                if (target is not null) inside = IsInside(Path.GetFullPath(target.FullName), root);
            }
            catch (IOException)
            {
                // unresolvable link: reading it fails later with its own message
            }
        }

        return inside
            ? null
            : $"{Clip(full, 200)} lies outside the folder of {Path.GetFileName(namingFile)} ({root}); files named there are read only from that folder " +
              $"and below unless {AllowOutsidePathsOption} is given";
    }

    private static bool IsInside(string full, string root)
    {
        var rel = Path.GetRelativePath(root, full);
        return !(Path.IsPathRooted(rel) || rel == ".." || rel.StartsWith(".." + Path.DirectorySeparatorChar, StringComparison.Ordinal));
    }

    /// <summary>Text repeated from a file, clipped to <paramref name="max"/> characters (control characters shown as '?').</summary>
    public static string Clip(string text, int max = EchoChars) => InputException.Clip(text, max);

    /// <summary>"256 MiB", "1.5 GiB", "812 bytes".</summary>
    public static string FormatBytes(long bytes) => bytes switch
    {
        >= 1L << 30 => $"{bytes / (double)(1L << 30):0.##} GiB",
        >= 1L << 20 => $"{bytes / (double)(1L << 20):0.##} MiB",
        >= 1L << 10 => $"{bytes / (double)(1L << 10):0.##} KiB",
        _ => $"{bytes} bytes",
    };

    /// <summary>Parses "512 MiB", "2 GB", "100000" (bytes); null when not a size.</summary>
    public static long? ParseBytes(string text)
    {
        var t = text.Trim();
        var i = 0;
        while (i < t.Length && (char.IsDigit(t[i]) || t[i] == '.')) i++;
        if (!double.TryParse(t[..i], System.Globalization.NumberStyles.Float, System.Globalization.CultureInfo.InvariantCulture, out var v) || !(v > 0)) return null;
        var unit = t[i..].Trim().ToLowerInvariant();
        double scale = unit switch
        {
            "" or "b" or "bytes" => 1,
            "k" or "kb" => 1e3,
            "kib" => 1 << 10,
            "m" or "mb" => 1e6,
            "mib" => 1 << 20,
            "g" or "gb" => 1e9,
            "gib" => 1L << 30,
            _ => double.NaN,
        };
        var bytes = v * scale;
        return double.IsFinite(bytes) && bytes >= 1 && bytes < long.MaxValue / 2 ? (long)bytes : null;
    }

    private static long NextPowerOfTwo(long n)
    {
        var p = 1L << 20;
        while (p < n && p < long.MaxValue / 4) p <<= 1;
        return p;
    }

    // ------------------------------------------------------------------ file type (before opening)

    private const int AtFdCwd = -100;
    private const uint StatxType = 0x1;

    [StructLayout(LayoutKind.Explicit, Size = 256)]
    private struct Statx
    {
        [FieldOffset(0)] public uint Mask;
        [FieldOffset(28)] public ushort Mode;
    }

    [DllImport("libc", EntryPoint = "statx", SetLastError = true)]
    private static extern int NativeStatx(int dirfd, [MarshalAs(UnmanagedType.LPUTF8Str)] string path, int flags, uint mask, out Statx buffer);

    private static bool _statxMissing;

    /// <summary>"a character device", "a FIFO (named pipe)", … for a path that is not a regular file; null for a
    /// regular file, or where the type cannot be asked (then only the size limit and the streamed limits apply).</summary>
    private static string? FileKind(string path)
    {
        if (!OperatingSystem.IsLinux() || _statxMissing) return null;
        Statx st;
        try
        {
            if (NativeStatx(AtFdCwd, path, 0, StatxType, out st) != 0) return null;
        }
        catch (Exception e) when (e is DllNotFoundException or EntryPointNotFoundException)
        {
            _statxMissing = true;
            return null;
        }

        if ((st.Mask & StatxType) == 0) return null;
        return (st.Mode & 0xF000) switch
        {
            0x8000 => null,
            0x4000 => "a folder",
            0x2000 => "a character device",
            0x6000 => "a block device",
            0x1000 => "a FIFO (named pipe)",
            0xC000 => "a socket",
            _ => "not a regular file",
        };
    }
}
