using Xunit;

// Namespace deliberately not OrderUnfold.Tests.Cli: a namespace named Cli under OrderUnfold.Tests would hide the
// OrderUnfold.Cli.Cli class from other test folders that write Cli.Cli.Run.
namespace OrderUnfold.Tests.CommandLine;

/// <summary>
/// The command line itself (System.CommandLine under the project's messages): help, version, the options every
/// command shares, and parse errors mapped to one message and exit code 2. Nothing here reads data or writes files.
/// </summary>
public sealed class CommandLineTests
{
    /// <summary>A folder no test creates: every command line here fails (or prints) before writing anything.</summary>
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-cli-line-" + Guid.NewGuid().ToString("N"));

    private static (int Code, string Out, string Err) Run(params string[] args) => CliRun.Run(args);

    /// <summary>A parse error: exit code 2, nothing on standard output, a message naming the command, no stack trace.</summary>
    private static string UsageError(params string[] args)
    {
        var (code, stdout, stderr) = Run(args);
        Assert.True(code == 2, $"exit {code}; stderr: {stderr}");
        Assert.Equal("", stdout);
        Assert.DoesNotContain("   at ", stderr);
        Assert.DoesNotContain("Exception", stderr);
        Assert.StartsWith($"orderunfold {args[0]}: ", stderr);
        return stderr.Split('\n')[0];
    }

    public static TheoryData<string> Commands =>
        ["demo", "unfold", "calibrate", "init", "simulate", "plan", "modes", "batch", "merge", "track", "simulate-archive"];

    /// <summary>The commands that draw PNG plots.</summary>
    public static TheoryData<string> PlottingCommands => ["demo", "unfold", "calibrate", "plan", "modes", "batch", "track"];

    [Fact]
    public void VersionPrintsTheProgramsVersion()
    {
        var (code, stdout, stderr) = Run("--version");
        Assert.Equal(0, code);
        Assert.Equal($"orderunfold {OrderUnfold.Cli.Cli.Version}", stdout.Trim());
        Assert.Equal("", stderr);
    }

    [Fact]
    public void HelpListsEveryCommandAndTheExitCodes()
    {
        var (code, stdout, _) = Run("help");
        Assert.Equal(0, code);
        foreach (var name in Commands) Assert.Contains(name, stdout);
        Assert.Contains("Exit codes: 0 ok, 1 some items or a stated requirement failed, 2 bad input", stdout);
        Assert.Contains("--max-file-size", stdout);
    }

    [Theory]
    [MemberData(nameof(Commands))]
    public void EveryCommandHasGeneratedHelpWithItsOwnText(string name)
    {
        var viaHelp = Run("help", name);
        var viaOption = Run(name, "--help");
        Assert.Equal(0, viaHelp.Code);
        Assert.Equal(0, viaOption.Code);
        Assert.Equal(viaHelp.Out, viaOption.Out);
        Assert.Contains($"orderunfold {name}", viaHelp.Out); // the generated usage line
        Assert.Contains("--allow-outside-paths", viaHelp.Out); // the options every command takes
    }

    [Theory]
    [MemberData(nameof(PlottingCommands))]
    public void EveryCommandThatDrawsPlotsTakesNoPlotsAndNoOtherSpelling(string name)
    {
        Assert.Contains("--no-plots", Run("help", name).Out);
        var message = UsageError(name, "--no-plot");
        Assert.Contains("unknown option --no-plot (did you mean --no-plots?)", message);
    }

    [Fact]
    public void HelpOfAnUnknownCommandIsBadInput()
    {
        var (code, _, stderr) = Run("help", "unfurl");
        Assert.Equal(2, code);
        Assert.Contains("unknown command 'unfurl'", stderr);
    }

    [Fact]
    public void ParseErrorsReadAsOneMessageNamingTheOption()
    {
        var setup = Path.Combine(_dir, "setup.toml");
        Assert.Contains("missing SETUP", UsageError("unfold"));
        Assert.Contains("unexpected argument 'b.toml'", UsageError("unfold", setup, "b.toml"));
        Assert.Contains("--out needs a value", UsageError("unfold", setup, "--out"));
        Assert.Contains("--out is given more than once", UsageError("unfold", setup, "--out", "a", "--out", "b"));
        Assert.Contains("--quiet is a flag and takes no value", UsageError("unfold", "--quiet=yes", setup));
        Assert.Contains("--out DIR is required", UsageError("simulate"));
        Assert.Contains("--jobs expects a whole number ≥ 1 but got '0'", UsageError("batch", "m.csv", "--out", _dir, "--jobs", "0"));
        Assert.Contains("--frame expects scan or anchor but got 'sideways'", UsageError("track", _dir, "--frame", "sideways"));
        Assert.Contains("--tolerance: \"15\" has no unit", UsageError("track", _dir, "--tolerance", "15"));
        Assert.Contains("--scenario expects demo, caesium or single", UsageError("simulate", "--out", _dir, "--scenario", "cesium"));
        Assert.Contains("--max-line-length expects a whole number of characters ≥ 80", UsageError("unfold", setup, "--max-line-length", "50"));
    }

    [Fact]
    public void UsageErrorsPointToTheCommandsHelp()
    {
        var (_, _, stderr) = Run("unfold", "--colour");
        var lines = stderr.Split('\n', StringSplitOptions.RemoveEmptyEntries);
        Assert.Equal(2, lines.Length);
        Assert.Contains("accepted: --out DIR, --calibration FILE, --no-plots, --quiet", lines[0]);
        Assert.Contains(" help unfold'", lines[1]);
    }

    [Theory]
    [InlineData("simulate")]
    [InlineData("plan")]
    public void LinesHaveOneSyntaxAndTheOtherSaysWhatToWrite(string command)
    {
        string[] args = command == "simulate"
            ? ["simulate", "--out", Path.Combine(_dir, "sim"), "--lines", "0 GHz, 3.2 GHz@0.5"]
            : ["plan", "--first-length", "100 mm", "--finesse", "150", "--span", "20 GHz", "--second-length", "93.7 mm", "--simulate", "--lines", "0 GHz, 3.2 GHz@0.5"];
        var message = UsageError(args);
        Assert.Contains("--lines: entry \"3.2 GHz@0.5\": the relative intensity follows ':', not '@': write \"3.2 GHz:0.5\"", message);
        Assert.False(Directory.Exists(_dir));
    }

    [Fact]
    public void BatchRefusesPlotsWithNoPlots()
    {
        var message = UsageError("batch", Path.Combine(_dir, "manifest.csv"), "--out", Path.Combine(_dir, "b"), "--plots", "--no-plots");
        Assert.Contains("--plots and --no-plots contradict each other", message);
    }

    [Fact]
    public void GlobalOptionsAreAcceptedAfterAnyCommand()
    {
        // the limits parse after the command's own options; the missing setup is then the (located) error
        var setup = Path.Combine(_dir, "no-such.toml");
        var (code, _, stderr) = Run("unfold", setup, "--max-file-size", "2 MiB", "--max-line-length", "4096", "--allow-outside-paths", "--quiet");
        Assert.Equal(2, code);
        Assert.StartsWith(setup + ":", stderr);
        Assert.Single(stderr.Trim().Split('\n'));
    }

    [Fact]
    public void APathMayBeginWithAnAtSign()
    {
        // no response files: '@name' is a path like any other
        var (code, _, stderr) = Run("unfold", "@setup.toml", "--quiet");
        Assert.Equal(2, code);
        Assert.Contains("@setup.toml: setup file not found", stderr);
    }
}
