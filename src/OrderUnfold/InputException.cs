namespace OrderUnfold;

/// <summary>
/// Bad input from a user-supplied file or value. Carries where it came from (file, line, column) so the
/// command line can print one message that points at the problem; never a stack trace.
/// </summary>
public sealed class InputException : Exception
{
    public InputException(string message, string? file = null, int? line = null, int? column = null, Exception? inner = null)
        : base(message, inner)
    {
        File = file;
        Line = line;
        Column = column;
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
