using System.CommandLine;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Io;

namespace OrderUnfold.Cli;

/// <summary>Parses the command line, runs the command, and decides the exit code for errors in one place.</summary>
public static class Cli
{
    /// <summary>How long a cancelled run may take to stop before the process is made to exit.</summary>
    public static readonly TimeSpan ForcedExitAfter = TimeSpan.FromSeconds(3);

    /// <summary>The program's version as <c>--version</c> prints it and reports record it.</summary>
    public static string Version =>
        typeof(InputException).Assembly.GetName().Version?.ToString(3) ?? "0.0.0";

    /// <summary>
    /// Runs the program on <paramref name="argv"/>, printing to <paramref name="stdout"/> and <paramref name="stderr"/>;
    /// returns the exit code (<see cref="ExitCodes"/>). <paramref name="services"/> replaces the pipeline pieces the
    /// commands call (tests); null: the program's own.
    /// </summary>
    public static int Run(IReadOnlyList<string> argv, TextWriter stdout, TextWriter stderr, CancellationToken cancel = default, CliServices? services = null)
    {
        var tree = new CommandTree(new CliContext(stdout, stderr, services ?? CliServices.Default));
        var parse = tree.Root.Parse(argv, CommandTree.Parsing);
        var command = parse.CommandResult.Command;
        if (ParseErrorMessage.Of(parse, argv, tree.Root, tree.Verbs) is { } problem)
        {
            stderr.WriteLine(problem);
            if (command != tree.Root) stderr.WriteLine($"(see '{Hint.Command("help " + command.Name)}')");
            return ExitCodes.BadInput;
        }

        using var limitScope = InputLimits.Use(tree.Limits(parse));
        try
        {
            return Invoke(parse, stdout, stderr, cancel);
        }
        catch (Exception e) when (cancel.IsCancellationRequested && IsCancellation(e))
        {
            stderr.WriteLine("orderunfold: stopped; no partial output was published");
            return ExitCodes.Interrupted;
        }
    }

    private static bool IsCancellation(Exception e) =>
        e is OperationCanceledException || (e is AggregateException a && a.Flatten().InnerExceptions.All(i => i is OperationCanceledException));

    /// <summary>Runs the parsed command, handing it <paramref name="cancel"/>; bad input of any kind becomes one message and exit code 2.</summary>
    private static int Invoke(ParseResult parse, TextWriter stdout, TextWriter stderr, CancellationToken cancel)
    {
        var name = parse.CommandResult.Command.Name;
        try
        {
            // System.CommandLine's own exception handler and Ctrl-C handling are off: both are this program's (Program.cs),
            // which cancels the token handed to the command's action here. The actions run synchronously on this thread.
            var configuration = new InvocationConfiguration { Output = stdout, Error = stderr, EnableDefaultExceptionHandler = false, ProcessTerminationTimeout = null };
            return parse.InvokeAsync(configuration, cancel).GetAwaiter().GetResult();
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or InputException && cancel.IsCancellationRequested)
        {
            // a file vanished under a stopping run (its staging folder is being removed): that is the stop, not bad input
            throw new OperationCanceledException("stopped", e, cancel);
        }
        catch (UsageException e)
        {
            stderr.WriteLine($"orderunfold {name}: {e.Message}");
            stderr.WriteLine($"(see '{Hint.Command("help " + name)}')");
            return ExitCodes.BadInput;
        }
        catch (InputException e)
        {
            stderr.WriteLine(e.Located);
            return ExitCodes.BadInput;
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            stderr.WriteLine($"orderunfold {name}: {e.Message}");
            return ExitCodes.BadInput;
        }
    }
}
