namespace OrderUnfold;

/// <summary>
/// Bad input from a user-supplied file or value. Carries where it came from (file, line, column) so the
/// command line can print one message that points at the problem; never a stack trace.
/// </summary>
public sealed class InputException : Exception
{
    /// <summary>A problem with user input: <paramref name="message"/> says what was expected and what arrived; <paramref name="file"/>, <paramref name="line"/> and <paramref name="column"/> (1-based) say where, when known.</summary>
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
        new("[^\\s]{61,}", System.Text.RegularExpressions.RegexOptions.CultureInvariant);

    /// <summary>Longest path a message keeps (a run without spaces holding '/' or '\\'), each name in it clipped like a cell.</summary>
    private const int PathChars = 300;

    /// <summary>Longest stretch of file content a message quotes, in characters.</summary>
    public const int EchoChars = 60;

    /// <summary>The text clipped to <paramref name="max"/> characters (an ellipsis marks the cut) with control
    /// characters replaced by '?'.</summary>
    public static string Clip(string text, int max = EchoChars)
    {
        var s = text.Length > max ? text[..Math.Max(1, max - 1)] + "…" : text;
        return string.Create(s.Length, s, (span, src) =>
        {
            for (var i = 0; i < src.Length; i++) span[i] = char.IsControl(src[i]) ? '?' : src[i];
        });
    }

    /// <summary>File content quoted in a message is clipped to <see cref="EchoChars"/> characters, control
    /// characters become '?', and the whole message is kept under <see cref="MaxMessageChars"/>: a message never
    /// repeats a file's content beyond one clipped cell.</summary>
    private static string Tidy(string message)
    {
        if (message.Length > 100 * MaxMessageChars) message = message[..(100 * MaxMessageChars)];
        var s = ClipQuoted(ClipQuoted(message, '"'), '\'');
        // a long run without spaces is a cell (clipped like one) unless it is a path (kept up to PathChars)
        s = LongWord.Replace(s, m => m.Value.IndexOfAny(['/', '\\']) >= 0 ? ClipPath(m.Value) : Clip(m.Value));
        s = new string(s.Select(ch => char.IsControl(ch) && ch != '\n' ? '?' : ch).ToArray());
        return s.Length > MaxMessageChars ? s[..(MaxMessageChars - 1)] + "…" : s;
    }

    /// <summary>A path with each folder or file name clipped like a cell, and the whole kept under <see cref="PathChars"/>.</summary>
    private static string ClipPath(string path)
    {
        var parts = path.Split('/', '\\');
        var sb = new System.Text.StringBuilder(path.Length);
        var pos = 0;
        foreach (var part in parts)
        {
            sb.Append(part.Length > EchoChars ? Clip(part) : part);
            pos += part.Length;
            if (pos < path.Length) sb.Append(path[pos++]);
        }

        return sb.Length > PathChars ? Clip(sb.ToString(), PathChars) : sb.ToString();
    }

    /// <summary>Clips each stretch between pairs of <paramref name="quote"/> (left to right) to the echo length.</summary>
    private static string ClipQuoted(string message, char quote)
    {
        var sb = new System.Text.StringBuilder(message.Length);
        var pos = 0;
        while (pos < message.Length)
        {
            var open = message.IndexOf(quote, pos);
            // an apostrophe ("calibration's") is not an opening single quote: one follows a space, a bracket or the start
            while (quote == '\'' && open > 0 && char.IsLetterOrDigit(message[open - 1])) open = message.IndexOf(quote, open + 1);
            if (open < 0)
            {
                sb.Append(message, pos, message.Length - pos);
                break;
            }

            var close = message.IndexOf(quote, open + 1);
            if (close < 0 && quote == '\'')
            {
                sb.Append(message, pos, message.Length - pos); // an unpaired single quote quotes nothing
                break;
            }

            if (close < 0) close = message.Length;
            sb.Append(message, pos, open + 1 - pos);
            var quoted = message[(open + 1)..close];
            sb.Append(quoted.Length > EchoChars ? Clip(quoted) : quoted);
            if (close < message.Length) sb.Append(quote);
            pos = close + 1;
        }

        return sb.ToString();
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
