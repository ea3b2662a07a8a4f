using System.CommandLine;

namespace OrderUnfold.Cli.CommandLine;

/// <summary>
/// One verb of the program (unfold, batch, …): its options and arguments as System.CommandLine symbols, the help
/// text beyond the generated option list, and what it does once the command line has parsed without error.
/// </summary>
internal abstract class VerbCommand : Command
{
    protected VerbCommand(string name, string summary, CliContext cli) : base(name, summary)
    {
        Context = cli;
        // the token is the run's (Ctrl-C / SIGTERM, Program.cs), given by Cli.Run to the invocation
        SetAction((parse, cancellationToken) => Task.FromResult(Run(parse, cancellationToken)));
    }

    /// <summary>Where the command prints, and the services it uses.</summary>
    protected CliContext Context { get; }

    /// <summary>Results and summaries.</summary>
    protected TextWriter Out => Context.Out;

    /// <summary>Progress, warnings and messages.</summary>
    protected TextWriter Error => Context.Error;

    /// <summary>Help printed after the generated option list: what the command reads and writes, its exit codes.</summary>
    public abstract string Details { get; }

    /// <summary>
    /// Runs the command on parsed values and returns the exit code. Bad input throws <see cref="InputException"/>,
    /// options that cannot go together throw <see cref="UsageException"/>; both give exit code 2. Long work is handed
    /// <paramref name="cancellationToken"/>; a cancelled run throws <see cref="OperationCanceledException"/> (exit 130/143).
    /// </summary>
    protected abstract int Run(ParseResult parse, CancellationToken cancellationToken);

    /// <summary>Adds the command's options, in the order its help lists them.</summary>
    protected void AddOptions(IEnumerable<Option> options)
    {
        foreach (var option in options) Add(option);
    }

    /// <summary>A required argument (a path) with its description.</summary>
    protected static Argument<string> PathArgument(string name, string description) => new(name) { Description = description };
}
