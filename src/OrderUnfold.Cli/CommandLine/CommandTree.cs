using System.CommandLine;
using System.CommandLine.Help;
using OrderUnfold.Cli.Commands;
using OrderUnfold.Io;

namespace OrderUnfold.Cli.CommandLine;

/// <summary>
/// The program's command line: the verbs in the order the help lists them (add a new command here), the options
/// every command accepts (input limits and path confinement, Io/InputLimits.cs), <c>help [COMMAND]</c> and
/// <c>--version</c>.
/// </summary>
internal sealed class CommandTree
{
    /// <summary>Width the generated help is wrapped to (the same in a terminal, a file or a test).</summary>
    private const int HelpWidth = 100;

    private readonly Option<long?> _maxFileSize = SharedOptions.MaxFileSize();
    private readonly Option<int?> _maxLineLength = SharedOptions.MaxLineLength();
    private readonly Option<bool> _allowOutsidePaths = SharedOptions.AllowOutsidePaths();
    private readonly Option<bool> _version = ValueOptions.Flag("--version", "print the version and stop");
    private readonly CliContext _cli;

    public CommandTree(CliContext cli)
    {
        _cli = cli;
        Verbs =
        [
            new DemoCommand(cli),
            new UnfoldCommand(cli),
            new CalibrateCommand(cli),
            new InitCommand(cli),
            new SimulateCommand(cli),
            new PlanCommand(cli),
            new ModesCommand(cli),
            new BatchCommand(cli),
            new MergeCommand(cli),
            new TrackCommand(cli),
            new SimulateArchiveCommand(cli),
        ];
        Root = new Command("orderunfold", "unfold overlapping orders of scanning Fabry–Pérot cavity sweeps");
        var help = new HelpOption();
        help.Action = new HelpWithDetails(new HelpAction { MaxWidth = HelpWidth }, Details);
        Root.Add(help);
        Root.Add(_version);
        foreach (var option in new Option[] { _maxFileSize, _maxLineLength, _allowOutsidePaths })
        {
            option.Recursive = true; // accepted after any command
            Root.Add(option);
        }

        foreach (var verb in Verbs) Root.Add(verb);
        Root.Add(HelpCommand());
        Root.SetAction(parse =>
        {
            if (parse.GetValue(_version))
            {
                cli.Out.WriteLine($"orderunfold {Cli.Version}");
                return ExitCodes.Ok;
            }

            WriteHelp([], cli.Out);
            return ExitCodes.BadInput; // no command at all: the command list, as a usage error
        });
    }

    /// <summary>The root of the command line (the program).</summary>
    public Command Root { get; }

    /// <summary>The verbs, in the order the help lists them.</summary>
    public IReadOnlyList<VerbCommand> Verbs { get; }

    /// <summary>How the command line is split: no response files (a path may begin with '@'), no bundled short flags.</summary>
    public static ParserConfiguration Parsing { get; } = new() { ResponseFileTokenReplacer = null, EnablePosixBundling = false };

    /// <summary>The input limits the command line states (the defaults where it states none).</summary>
    public InputLimits Limits(ParseResult parse)
    {
        var limits = InputLimits.Default;
        if (parse.GetValue(_maxFileSize) is long bytes) limits = limits with { MaxFileBytes = bytes };
        if (parse.GetValue(_maxLineLength) is int chars) limits = limits with { MaxLineChars = chars };
        return parse.GetValue(_allowOutsidePaths) ? limits with { AllowOutsidePaths = true } : limits;
    }

    /// <summary>Writes the help of the command at <paramref name="path"/> (empty: the command list) to <paramref name="output"/>.</summary>
    private void WriteHelp(string[] path, TextWriter output) =>
        Root.Parse([.. path, "--help"], Parsing).Invoke(new InvocationConfiguration { Output = output, Error = _cli.Error, EnableDefaultExceptionHandler = false, ProcessTerminationTimeout = null });

    /// <summary><c>help [COMMAND]</c>: the command list, or one command's options.</summary>
    private Command HelpCommand()
    {
        var name = new Argument<string?>("COMMAND") { Arity = ArgumentArity.ZeroOrOne, Description = "the command whose options to show" };
        var command = new Command("help", "show the command list, or the options of one command") { name };
        command.SetAction(parse =>
        {
            var wanted = parse.GetValue(name);
            if (wanted is not null && Verbs.All(v => v.Name != wanted))
            {
                _cli.Error.WriteLine($"orderunfold: unknown command '{InputException.Clip(wanted)}'; commands: {string.Join(", ", Verbs.Select(v => v.Name))}");
                return ExitCodes.BadInput;
            }

            WriteHelp(wanted is null ? [] : [wanted], _cli.Out);
            return ExitCodes.Ok;
        });
        return command;
    }

    private string? Details(Command command) => command switch
    {
        VerbCommand verb => verb.Details,
        _ when command == Root => $"""
            '{Hint.Command("help COMMAND")}' shows a command's options.
            Plots: every command that draws PNG plots draws them unless given --no-plots; 'batch' draws none unless
            given --plots (one set per item is slow).
            Exit codes: 0 ok, 1 some items or a stated requirement failed, 2 bad input, 130 interrupted (Ctrl-C),
            143 terminated (SIGTERM).
            """,
        _ => null,
    };
}
