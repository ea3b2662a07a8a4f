using System.CommandLine;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Io;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold init [PATH]</c>: writes the commented setup template.</summary>
internal sealed class InitCommand : VerbCommand
{
    private readonly Argument<string?> _path = new("PATH") { Arity = ArgumentArity.ZeroOrOne, Description = "where the template goes (default: setup.toml)" };
    private readonly Option<bool> _force = ValueOptions.Flag("--force", "overwrite an existing file");

    public InitCommand(CliContext cli) : base("init", "write a commented setup template to edit", cli)
    {
        Add(_path);
        Add(_force);
    }

    public override string Details => """
        Every key is explained in the template and in docs/setup.md. An existing file is not overwritten
        unless --force is given (exit code 2).
        """;

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        var path = parse.GetValue(_path) ?? "setup.toml";
        if (File.Exists(path) && !parse.GetValue(_force))
        {
            Error.WriteLine($"{path}: exists already; use --force to overwrite it");
            return ExitCodes.BadInput;
        }

        AtomicFile.WriteAllText(path, SetupReader.Template());
        Out.WriteLine($"wrote {Path.GetFullPath(path)}: edit the instruments and the sweep files, then run '{Hint.Command("unfold " + Hint.Quote(path))}'");
        return ExitCodes.Ok;
    }
}
