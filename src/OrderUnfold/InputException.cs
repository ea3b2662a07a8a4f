namespace OrderUnfold;

/// <summary>
/// Bad input from a user-supplied file or value. Carries where it came from (file, line, column) so the
/// command line can print one message that points at the problem; never a stack trace.
/// </summary>
public sealed class InputException : Exception
{
    public InputException(string message, string? file = null, int? line = null, int? column = null, Exception? inner = null)
        : base(Tidy(message), inner)
    {
        File = file;
        Line = line;
        Column = column;
    }

    /// <summary>Longest message kept (a safety net: readers clip the cells they quote themselves).</summary>
    public const int MaxMessageChars = 2000;

    private static readonly System.Text.RegularExpressions.Regex LongWord =
        new("[^\\s]{400,}", System.Text.RegularExpressions.RegexOptions.CultureInvariant);

    /// <summary>File content quoted in a message is clipped to <see cref="Io.InputLimits.EchoChars"/> characters, control
    /// characters become '?', and the whole message is kept under <see cref="MaxMessageChars"/>: a message never
    /// repeats a file's content beyond one clipped cell.</summary>
    private static string Tidy(string message)
    {
        if (message.Length > 100 * MaxMessageChars) message = message[..(100 * MaxMessageChars)];
        // quoted text alternates with the message's own words: clip each quoted stretch (pairs of '"', left to right)
        var sb = new System.Text.StringBuilder(message.Length);
        var pos = 0;
        while (pos < message.Length)
        {
            var open = message.IndexOf('"', pos);
            var close = open < 0 ? -1 : message.IndexOf('"', open + 1);
            if (open < 0)
            {
                sb.Append(message, pos, message.Length - pos);
                break;
            }

            if (close < 0) close = message.Length;
            sb.Append(message, pos, open + 1 - pos);
            var quoted = message[(open + 1)..close];
            sb.Append(quoted.Length > Io.InputLimits.EchoChars ? Io.InputLimits.Clip(quoted) : quoted);
            if (close < message.Length) sb.Append('"');
            pos = close + 1;
        }

        var s = sb.ToString();
        s = LongWord.Replace(s, m => Io.InputLimits.Clip(m.Value));
        s = new string(s.Select(ch => char.IsControl(ch) && ch != '\n' ? '?' : ch).ToArray());
        return s.Length > MaxMessageChars ? s[..(MaxMessageChars - 1)] + "…" : s;
    }

    /// <summary>The file the problem is in, or null for a command-line value.</summary>
    public string? File { get; }

    /// <summary>1-based line number, when known.</summary>
    public int? Line { get; }

    /// <summary>1-based column number, when known.</summary>
    public int? Column { get; }

    /// <summary>The message with its location in front: <c>file:line:column: message</c>.</summary>
    public string Located
    {
        get
        {
            if (File is null) return Message;
            var where = File;
            if (Line is int l) where += $":{l}";
            if (Line is not null && Column is int c) where += $":{c}";
            return $"{where}: {Message}";
        }
    }

    /// <summary>The same problem, attributed to a file (and optionally a line and column) when it had none.</summary>
    public InputException At(string file, int? line = null, int? column = null) =>
        new(Message, File ?? file, Line ?? line, Column ?? column, InnerException);
}
