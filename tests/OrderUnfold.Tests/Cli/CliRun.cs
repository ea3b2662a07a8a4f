using System.Globalization;

// Namespace deliberately not OrderUnfold.Tests.Cli: a namespace named Cli under OrderUnfold.Tests would hide the
// OrderUnfold.Cli.Cli class from other test folders that write Cli.Cli.Run.
namespace OrderUnfold.Tests.CommandLine;

/// <summary>Runs the program in-process as a user would (same parsing, messages and exit codes), capturing its output.</summary>
public static class CliRun
{
    public static (int Code, string Out, string Err) Run(params string[] args)
    {
        var stdout = new StringWriter(CultureInfo.InvariantCulture);
        var stderr = new StringWriter(CultureInfo.InvariantCulture);
        var code = OrderUnfold.Cli.Cli.Run(args, stdout, stderr);
        return (code, stdout.ToString(), stderr.ToString());
    }
}
