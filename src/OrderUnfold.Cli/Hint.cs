namespace OrderUnfold.Cli;

/// <summary>
/// Next-command hints that work as the program was started: from the repository (the README's
/// <c>dotnet run -c Release --project src/OrderUnfold.Cli -- …</c>) or from its built assembly
/// (<c>dotnet …/OrderUnfold.Cli.dll …</c>). No installed <c>orderunfold</c> command is assumed.
/// </summary>
public static class Hint
{
    /// <summary>The command line that runs this program with <paramref name="arguments"/> from the current folder.</summary>
    public static string Command(string arguments)
    {
        if (File.Exists(Path.Combine("src", "OrderUnfold.Cli", "OrderUnfold.Cli.csproj")))
            return $"dotnet run -c Release --project src/OrderUnfold.Cli -- {arguments}";
        var dll = Path.Combine(AppContext.BaseDirectory, "OrderUnfold.Cli.dll");
        return $"dotnet {Quote(dll)} {arguments}";
    }

    /// <summary>A path quoted for a POSIX shell when it needs it.</summary>
    public static string Quote(string path) =>
        path.All(c => char.IsLetterOrDigit(c) || c is '/' or '.' or '-' or '_' or '+' or ':' or '=' or ',') ? path : "'" + path.Replace("'", "'\\''") + "'";
}
