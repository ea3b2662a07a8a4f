using System.Globalization;
using OrderUnfold.Simulation;
using Xunit;
using Xunit.Abstractions;

// Namespace deliberately not OrderUnfold.Tests.Cli: a namespace named Cli under OrderUnfold.Tests would hide the
// OrderUnfold.Cli.Cli class from other test folders that write Cli.Cli.Run.
namespace OrderUnfold.Tests.CommandLine;

/// <summary>
/// Bad input end to end through <c>orderunfold unfold</c>: each fault gives exit code 2 and exactly one message on
/// standard error that names the file at fault (with line and column where they exist), never a stack trace.
/// The inputs are small simulated files with one fault injected each.
/// </summary>
public class CliBadInputTests(CliTestFolder folder, ITestOutputHelper output) : IClassFixture<CliTestFolder>
{
    private static (int Code, string Out, string Err) Run(params string[] args) => CliRun.Run(args);

    /// <summary>Runs unfold on a setup and checks the common contract; returns the single message.</summary>
    private string UnfoldFails(string setup, string outDir)
    {
        var (code, _, err) = Run("unfold", setup, "--out", outDir, "--quiet", "--no-plots");
        Assert.Equal(2, code);
        Assert.DoesNotContain("   at ", err);
        Assert.DoesNotContain("Exception", err);
        var lines = err.Split('\n', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries);
        Assert.True(lines.Length == 1, $"expected exactly one message on stderr but got {lines.Length}:\n{err}");
        Assert.False(File.Exists(Path.Combine(outDir, "report.json")), "a failed run must not leave a report");
        output.WriteLine(lines[0]);
        return lines[0];
    }

    private static int LineOf(string path, string text) =>
        Array.FindIndex(File.ReadAllLines(path), l => l.Contains(text, StringComparison.Ordinal)) + 1;

    /// <summary>Replaces the first occurrence of <paramref name="old"/> in a text file.</summary>
    private static void ReplaceFirst(string path, string old, string replacement)
    {
        var text = File.ReadAllText(path);
        var i = text.IndexOf(old, StringComparison.Ordinal);
        Assert.True(i >= 0, $"'{old}' not in {path}");
        File.WriteAllText(path, text[..i] + replacement + text[(i + old.Length)..]);
    }

    /// <summary>Rewrites field <paramref name="column"/> (0-based) of every data row of a simulated CSV.</summary>
    private static void RewriteColumn(string path, int column, Func<int, string, string> value)
    {
        var lines = File.ReadAllLines(path);
        var header = Array.FindIndex(lines, l => l.StartsWith("time_s,", StringComparison.Ordinal));
        for (var i = header + 1; i < lines.Length; i++)
        {
            var f = lines[i].Split(',');
            f[column] = value(i + 1, f[column]);
            lines[i] = string.Join(',', f);
        }

        File.WriteAllLines(path, lines);
    }

    [Fact]
    public void MissingSetupFile()
    {
        var dir = folder.Copy("missing-setup");
        var setup = Path.Combine(dir, "no-such-setup.toml");
        var message = UnfoldFails(setup, Path.Combine(dir, "out"));
        Assert.StartsWith(setup + ":", message);
        Assert.Contains("not found", message);
    }

    [Fact]
    public void UnknownSetupKey()
    {
        var dir = folder.Copy("unknown-key");
        var setup = Path.Combine(dir, "setup.toml");
        ReplaceFirst(setup, "fix_finesse = false\n", "fix_finesse = false\ncolour = \"red\"\n");
        var line = LineOf(setup, "colour");
        var message = UnfoldFails(setup, Path.Combine(dir, "out"));
        Assert.StartsWith($"{setup}:{line}:1:", message);
        Assert.Contains("colour", message);
        Assert.Contains("fix_finesse", message); // lists the accepted keys
    }

    [Fact]
    public void NegativeLength()
    {
        var dir = folder.Copy("negative-length");
        var setup = Path.Combine(dir, "setup.toml");
        ReplaceFirst(setup, "length = \"100 mm\"", "length = \"-100 mm\"");
        var line = LineOf(setup, "-100 mm");
        var column = File.ReadAllLines(setup)[line - 1].IndexOf('"') + 1;
        var message = UnfoldFails(setup, Path.Combine(dir, "out"));
        Assert.StartsWith($"{setup}:{line}:{column}:", message);
        Assert.Contains("-100 mm", message);
        Assert.Contains("positive", message);
    }

    [Fact]
    public void FinesseBelowOne()
    {
        var dir = folder.Copy("low-finesse");
        var setup = Path.Combine(dir, "setup.toml");
        ReplaceFirst(setup, "finesse = 150", "finesse = 0.5");
        var line = LineOf(setup, "finesse = 0.5");
        var message = UnfoldFails(setup, Path.Combine(dir, "out"));
        Assert.StartsWith($"{setup}:{line}:", message);
        Assert.Contains("at least 1", message);
        Assert.Contains("0.5", message);
    }

    [Fact]
    public void SweepFileNamedBySetupDoesNotExist()
    {
        var dir = folder.Copy("missing-sweep");
        var setup = Path.Combine(dir, "setup.toml");
        ReplaceFirst(setup, "file = \"A_source.csv\"", "file = \"A_gone.csv\"");
        var line = LineOf(setup, "A_gone.csv");
        var message = UnfoldFails(setup, Path.Combine(dir, "out"));
        Assert.StartsWith($"{setup}:{line}:", message);
        Assert.Contains("A_gone.csv", message);
        Assert.Contains("not found", message);
    }

    [Fact]
    public void EmptySweepFile()
    {
        var dir = folder.Copy("empty-sweep");
        var csv = Path.Combine(dir, "A_source.csv");
        File.WriteAllText(csv, "");
        var message = UnfoldFails(Path.Combine(dir, "setup.toml"), Path.Combine(dir, "out"));
        Assert.StartsWith(csv + ":", message);
        Assert.Contains("empty", message);
    }

    [Fact]
    public void HeaderOnlySweepFile()
    {
        var dir = folder.Copy("header-only");
        var csv = Path.Combine(dir, "A_source.csv");
        File.WriteAllText(csv, "time_s,ramp_V,signal_V\n");
        var message = UnfoldFails(Path.Combine(dir, "setup.toml"), Path.Combine(dir, "out"));
        Assert.StartsWith(csv + ":1:", message);
        Assert.Contains("only a header", message);
    }

    [Fact]
    public void NonNumericCell()
    {
        var dir = folder.Copy("non-numeric");
        var csv = Path.Combine(dir, "B_source.csv");
        RewriteColumn(csv, 2, (line, v) => line == 1234 ? "abc" : v);
        var message = UnfoldFails(Path.Combine(dir, "setup.toml"), Path.Combine(dir, "out"));
        Assert.StartsWith($"{csv}:1234:3:", message);
        Assert.Contains("\"abc\"", message);
        Assert.Contains("signal_V", message);
    }

    [Fact]
    public void NaNInTheMiddle()
    {
        var dir = folder.Copy("nan");
        var csv = Path.Combine(dir, "A_source.csv");
        RewriteColumn(csv, 2, (line, v) => line == 2000 ? "NaN" : v);
        var message = UnfoldFails(Path.Combine(dir, "setup.toml"), Path.Combine(dir, "out"));
        Assert.StartsWith($"{csv}:2000:3:", message);
        Assert.Contains("NaN", message);
    }

    [Fact]
    public void ConstantRamp()
    {
        var dir = folder.Copy("constant-ramp");
        var csv = Path.Combine(dir, "A_source.csv");
        RewriteColumn(csv, 1, (_, _) => "2.5000");
        var message = UnfoldFails(Path.Combine(dir, "setup.toml"), Path.Combine(dir, "out"));
        Assert.StartsWith(csv + ":", message);
        Assert.Contains("ramp is constant", message);
    }

    [Fact]
    public void NoCalibrationPeaks()
    {
        var dir = folder.Copy("flat-calibration");
        var csv = Path.Combine(dir, "A_calibration.csv");
        RewriteColumn(csv, 2, (_, _) => "0.0213");
        var message = UnfoldFails(Path.Combine(dir, "setup.toml"), Path.Combine(dir, "out"));
        Assert.StartsWith(csv + ":", message);
        Assert.Contains("calibration", message);
    }

    [Fact]
    public void RecordsShorterThanOneFsr()
    {
        // every record (source and calibration) spans 0.6 FSR: no axis can be calibrated, so nothing can be unfolded
        var dir = Path.Combine(folder.Root, "short-span");
        SimulationFiles.Write(CliTestFolder.Spec(spanFsr: 0.6, samples: 3000), dir);
        var message = UnfoldFails(Path.Combine(dir, "setup.toml"), Path.Combine(dir, "out"));
        Assert.Contains(dir, message); // names a file of this case
        Assert.Contains(".csv", message);
    }

    [Fact]
    public void SourceSweepShorterThanOneFsrInsideTheCalibratedRange()
    {
        // x = ramp voltage. The calibration covers 0–10 V (4 FSR); the source ramp is squeezed to 4–6 V, i.e. 0.8 FSR,
        // inside the calibrated range: the unfold must refuse it, saying it needs at least one FSR. Self-calibration is off:
        // the rewritten ramp no longer matches the light (the source still repeats every quarter of its new range), and
        // self-calibration would rightly find that from the source's own repeats.
        var dir = folder.Copy("short-source");
        var setup = Path.Combine(dir, "setup.toml");
        var text = File.ReadAllText(setup).Replace("x_column = \"time_s\"", "x_column = \"ramp_V\"").Replace("scan = \"time\"", "scan = \"ramp\"");
        text = System.Text.RegularExpressions.Regex.Replace(text, "self_calibrate = \"[a-z]+\"", "self_calibrate = \"never\"");
        Assert.Contains("self_calibrate = \"never\"", text);
        File.WriteAllText(setup, text);
        var csv = Path.Combine(dir, "A_source.csv");
        RewriteColumn(csv, 1, (_, v) => (4 + 0.2 * double.Parse(v, CultureInfo.InvariantCulture)).ToString("F4", CultureInfo.InvariantCulture));
        var message = UnfoldFails(setup, Path.Combine(dir, "out"));
        Assert.True(message.Contains("A_source.csv") && message.Contains("FSR"), message);
    }

    [Fact]
    public void SourceSweepEntirelyOutsideTheCalibratedRange()
    {
        // x = ramp voltage; the calibration covers its peaks between about 0 and 10 V, the source ramp is squeezed to
        // 9.90–10.00 V, beyond the last calibration peak: every sample is trimmed as outside the calibrated range.
        var dir = folder.Copy("outside-range");
        var setup = Path.Combine(dir, "setup.toml");
        var text = File.ReadAllText(setup).Replace("x_column = \"time_s\"", "x_column = \"ramp_V\"").Replace("scan = \"time\"", "scan = \"ramp\"");
        File.WriteAllText(setup, text);
        var csv = Path.Combine(dir, "A_source.csv");
        RewriteColumn(csv, 1, (_, v) => (9.9 + 0.01 * double.Parse(v, CultureInfo.InvariantCulture)).ToString("F5", CultureInfo.InvariantCulture));
        var message = UnfoldFails(setup, Path.Combine(dir, "out"));
        Assert.Contains("A_source.csv", message);
        Assert.Contains("calibrated range", message);
    }

    [Fact]
    public void UnknownCommandAndHelp()
    {
        var (code, _, err) = Run("unfurl", "x.toml");
        Assert.Equal(2, code);
        Assert.Contains("unknown command 'unfurl'", err);
        Assert.Contains("unfold", err); // lists the commands

        var help = Run("--help");
        Assert.Equal(0, help.Code);
        Assert.Contains("unfold", help.Out);
        Assert.Equal("", help.Err);

        Assert.Equal(2, Run().Code); // no command at all is a usage error (help is printed)
        var usage = Run("help", "unfold");
        Assert.Equal(0, usage.Code);
        Assert.Contains("orderunfold unfold <SETUP>", usage.Out); // the generated usage line
        Assert.Equal(0, Run("unfold", "--help").Code);
    }

    [Fact]
    public void UnknownOptionIsAUsageError()
    {
        var (code, _, err) = Run("unfold", Path.Combine(folder.Base, "setup.toml"), "--colour", "red");
        Assert.Equal(2, code);
        Assert.Contains("unknown option --colour", err);
        Assert.DoesNotContain("   at ", err);
    }
}
