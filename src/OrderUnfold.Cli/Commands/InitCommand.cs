using OrderUnfold.Io;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold init [PATH]</c>: writes the commented setup template.</summary>
public sealed class InitCommand : ICommand
{
    public string Name => "init";
    public string Summary => "write a commented setup template to edit";

    public string Usage => """
        orderunfold init [PATH] [--force]

        Writes a commented setup template (default PATH: setup.toml). Every key is explained in the
        template and in docs/setup.md. An existing file is not overwritten unless --force is given.
        """;

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args, [], ["force"]);
        var path = a.Positionals.Count > 0 ? a.Positionals[0] : "setup.toml";
        a.NoMorePositionals(1);
        if (File.Exists(path) && !a.Flag("force"))
        {
            stderr.WriteLine($"{path}: exists already; use --force to overwrite it");
            return ExitCodes.BadInput;
        }

        AtomicFile.WriteAllText(path, SetupReader.Template());
        stdout.WriteLine($"wrote {Path.GetFullPath(path)}: edit the instruments and the sweep files, then run '{Hint.Command("unfold " + Hint.Quote(path))}'");
        return ExitCodes.Ok;
    }
}
