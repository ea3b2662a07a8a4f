namespace OrderUnfold.Io;

/// <summary>
/// Next-command hints in the form that works where the program runs: the command the repository's
/// <c>orderunfold</c> launcher says it was typed as (<c>orderunfold</c> when found on PATH, else its path), an
/// installed .NET tool's <c>orderunfold</c>, the launcher beside the current folder's sources, or the built
/// assembly (<c>dotnet …/OrderUnfold.Cli.dll …</c>).
/// </summary>
public static class Hint
{
    /// <summary>The variable through which the launcher passes the command as the user typed it.</summary>
    public const string CommandVariable = "ORDERUNFOLD_COMMAND";

    /// <summary>The command line that runs this program with <paramref name="arguments"/> from the current folder.</summary>
    public static string Command(string arguments) => $"{Program()} {arguments}";

    private static string Program()
    {
        var typed = Environment.GetEnvironmentVariable(CommandVariable);
        if (!string.IsNullOrWhiteSpace(typed)) return Quote(typed);
        if (string.Equals(Path.GetFileNameWithoutExtension(Environment.ProcessPath), "orderunfold", StringComparison.Ordinal))
            return "orderunfold"; // an installed .NET tool (dotnet tool install)
        if (File.Exists("orderunfold") && File.Exists(Path.Combine("src", "OrderUnfold.Cli", "OrderUnfold.Cli.csproj")))
            return "./orderunfold"; // `dotnet run` from the repository root, where the launcher is
        return $"dotnet {Quote(Path.Combine(AppContext.BaseDirectory, "OrderUnfold.Cli.dll"))}";
    }

    /// <summary>A path quoted for a POSIX shell when it needs it.</summary>
    public static string Quote(string path) =>
        path.All(c => char.IsLetterOrDigit(c) || c is '/' or '.' or '-' or '_' or '+' or ':' or '=' or ',') ? path : "'" + path.Replace("'", "'\\''") + "'";
}
