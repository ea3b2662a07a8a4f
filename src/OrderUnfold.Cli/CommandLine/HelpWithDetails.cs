using System.CommandLine;
using System.CommandLine.Help;
using System.CommandLine.Invocation;

namespace OrderUnfold.Cli.CommandLine;

/// <summary>
/// The help action: System.CommandLine's generated help (description, usage, arguments, options), then the
/// command's own text (<see cref="VerbCommand.Details"/>, or the program's for the command list).
/// </summary>
internal sealed class HelpWithDetails(HelpAction generated, Func<Command, string?> details) : SynchronousCommandLineAction
{
    /// <summary>Help is shown even when the rest of the command line is incomplete (<c>unfold --help</c>).</summary>
    public override bool ClearsParseErrors => true;

    public override int Invoke(ParseResult parseResult)
    {
        generated.Invoke(parseResult);
        var text = details(parseResult.CommandResult.Command);
        if (!string.IsNullOrWhiteSpace(text))
        {
            var output = parseResult.InvocationConfiguration.Output;
            output.WriteLine(text.TrimEnd());
            output.WriteLine();
        }

        return ExitCodes.Ok;
    }
}
