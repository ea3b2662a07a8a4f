using System.Globalization;
using System.Text.Json;
using OrderUnfold.Analysis.Modes;
using OrderUnfold.Cli;
using Xunit;

namespace OrderUnfold.Tests.Analysis.Modes;

/// <summary>
/// <c>orderunfold modes</c> end to end through <see cref="OrderUnfold.Cli.Cli.Run"/>: small simulated
/// lines.csv / report.json files in a temporary folder; exit codes 0 (PASS), 1 (FAIL), 2 (bad input).
/// </summary>
public sealed class ModesCommandTests : IDisposable
{
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-modes-cli-" + Guid.NewGuid().ToString("N"));

    public ModesCommandTests() => Directory.CreateDirectory(_dir);

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); } catch (IOException) { }
    }

    /// <summary>Simulated single-mode laser: the main mode and two side modes one spacing (150 GHz) away.</summary>
    private string Laser(double sideDb, string name = "result", double detectionLimit = 1e-4)
    {
        var dir = Path.Combine(_dir, name);
        Directory.CreateDirectory(dir);
        var side = Math.Pow(10, sideDb / 10);
        var ci = CultureInfo.InvariantCulture;
        File.WriteAllText(Path.Combine(dir, "lines.csv"),
            "frequency_hz,frequency_sigma_hz,intensity,intensity_sigma,snr\n" +
            "0,2e6,1.0,0.01,900\n" +
            $"1.5e11,2e6,{side.ToString("R", ci)},{(0.05 * side).ToString("R", ci)},12\n" +
            $"-1.5e11,2e6,{(0.5 * side).ToString("R", ci)},{(0.05 * side).ToString("R", ci)},6\n");
        File.WriteAllText(Path.Combine(dir, "report.json"),
            $"{{\"detection_limit\": {detectionLimit.ToString("R", ci)}, \"orders_resolved\": true, \"anchor_frequency_hz\": 193.4e12}}");
        return dir;
    }

    private static (int Code, string Out, string Err) Run(params string[] args)
    {
        var o = new StringWriter();
        var e = new StringWriter();
        var code = OrderUnfold.Cli.Cli.Run(args, o, e);
        return (code, o.ToString(), e.ToString());
    }

    [Fact]
    public void SmsrAboveRequirement_Passes_WithExitCode0()
    {
        var dir = Laser(sideDb: -35);
        var (code, stdout, stderr) = Run("modes", dir, "--require-smsr", "30dB");
        Assert.Equal(0, code);
        Assert.Equal("", stderr);
        var last = stdout.TrimEnd().Split('\n')[^1];
        Assert.StartsWith("PASS: SMSR 35", last);
        Assert.Contains("≥ 30 dB", last);

        // Outputs next to the input.
        using var json = JsonDocument.Parse(File.ReadAllText(Path.Combine(dir, "modes.json")));
        var root = json.RootElement;
        Assert.Equal(35.0, root.GetProperty("smsr").GetProperty("value_db").GetDouble(), 9);
        Assert.Equal("measured", root.GetProperty("smsr").GetProperty("kind").GetString());
        Assert.True(root.GetProperty("verdict").GetProperty("passed").GetBoolean());
        Assert.Equal(1.5e11, root.GetProperty("spacing").GetProperty("spacing_hz").GetDouble(), 1e-3);
        Assert.Equal(3, root.GetProperty("comb").GetProperty("members").GetInt32());

        var csv = File.ReadAllLines(Path.Combine(dir, "modes.csv"));
        Assert.Equal(string.Join(",", ModeOutputs.CsvColumns), csv[0]);
        Assert.Equal(4, csv.Length);
        // Rows by mode index: k = −1 (−38 dB), 0 (strongest), +1 (−35 dB); absolute frequency from the anchor.
        var k0 = csv[2].Split(',');
        Assert.Equal(["0", "main", "0"], k0[..3]);
        Assert.Equal("0", k0[4]);
        Assert.Equal(193.4e12, double.Parse(k0[8], CultureInfo.InvariantCulture), 1e-3);
        Assert.Equal(-35.0, double.Parse(csv[3].Split(',')[4], CultureInfo.InvariantCulture), 9);

        var png = File.ReadAllBytes(Path.Combine(dir, "modes.png"));
        Assert.Equal(new byte[] { 0x89, 0x50, 0x4E, 0x47 }, png[..4]);
    }

    [Fact]
    public void SmsrBelowRequirement_Fails_WithExitCode1()
    {
        var dir = Laser(sideDb: -25);
        var (code, stdout, _) = Run("modes", dir, "--require-smsr", "30dB");
        Assert.Equal(1, code);
        Assert.StartsWith("FAIL: SMSR 25", stdout.TrimEnd().Split('\n')[^1]);
        Assert.Contains("< 30 dB required", stdout);
        using var json = JsonDocument.Parse(File.ReadAllText(Path.Combine(dir, "modes.json")));
        Assert.False(json.RootElement.GetProperty("verdict").GetProperty("passed").GetBoolean());
    }

    [Fact]
    public void MaxModesRequirement_CountsLinesWithinTheLevel()
    {
        var dir = Laser(sideDb: -15);
        Assert.Equal(1, Run("modes", dir, "--require-max-modes", "1").Code);
        Assert.Equal(0, Run("modes", dir, "--require-max-modes", "3").Code);
        Assert.Equal(0, Run("modes", dir, "--require-max-modes", "1", "--within", "10dB").Code);
    }

    [Fact]
    public void SingleLine_LowerBoundFromDetectionLimit_DecidesTheVerdict()
    {
        var dir = Path.Combine(_dir, "single");
        Directory.CreateDirectory(dir);
        File.WriteAllText(Path.Combine(dir, "lines.csv"), "frequency_hz,intensity\n0,1\n");
        File.WriteAllText(Path.Combine(dir, "report.json"), "{\"detection_limit\": 1e-4}");
        var pass = Run("modes", dir, "--require-smsr", "30dB");
        Assert.Equal(0, pass.Code);
        Assert.Contains("SMSR ≥ 40.0 dB", pass.Out);
        var fail = Run("modes", dir, "--require-smsr", "45dB");
        Assert.Equal(1, fail.Code);
        Assert.Contains("FAIL: SMSR only shown to be ≥ 40 dB", fail.Out);
    }

    [Fact]
    public void NoRequirement_ExitsZeroWithoutVerdict_AndOutGoesWhereAsked()
    {
        var dir = Laser(sideDb: -20);
        var outDir = Path.Combine(_dir, "elsewhere", "out");
        var (code, stdout, _) = Run("modes", dir, "--out", outDir, "--group-index", "3.5", "--no-plots");
        Assert.Equal(0, code);
        Assert.DoesNotContain("PASS", stdout);
        Assert.DoesNotContain("FAIL", stdout);
        Assert.Contains("physical length", stdout);
        Assert.True(File.Exists(Path.Combine(outDir, "modes.json")));
        Assert.True(File.Exists(Path.Combine(outDir, "modes.csv")));
        Assert.False(File.Exists(Path.Combine(outDir, "modes.png")));
        Assert.False(File.Exists(Path.Combine(dir, "modes.json")));
        using var json = JsonDocument.Parse(File.ReadAllText(Path.Combine(outDir, "modes.json")));
        Assert.False(json.RootElement.TryGetProperty("verdict", out _));
    }

    [Fact]
    public void BadInput_ExitCode2()
    {
        // No lines.csv in the folder.
        var empty = Path.Combine(_dir, "empty");
        Directory.CreateDirectory(empty);
        var r = Run("modes", empty, "--require-smsr", "30dB");
        Assert.Equal(2, r.Code);
        Assert.Contains("lines.csv", r.Err);

        // A malformed number: file, line and column in front of the message.
        var bad = Path.Combine(_dir, "bad");
        Directory.CreateDirectory(bad);
        File.WriteAllText(Path.Combine(bad, "lines.csv"), "frequency_hz,intensity\n0,1\n1e9,x\n");
        r = Run("modes", bad, "--require-smsr", "30dB");
        Assert.Equal(2, r.Code);
        Assert.StartsWith(Path.Combine(bad, "lines.csv") + ":3:2: expected a finite number", r.Err);

        // A level without its unit, an unknown option, a missing argument, a path that is neither.
        var ok = Laser(-30);
        r = Run("modes", ok, "--require-smsr", "30");
        Assert.Equal(2, r.Code);
        Assert.Contains("dB", r.Err);
        Assert.Equal(2, Run("modes", ok, "--require-snr", "30dB").Code);
        Assert.Equal(2, Run("modes").Code);
        Assert.Equal(2, Run("modes", Path.Combine(_dir, "missing")).Code);
        Assert.Equal(2, Run("modes", ok, "--group-index", "-2").Code);
        Assert.Equal(2, Run("modes", ok, "--spacing-min", "5GHz", "--spacing-max", "1GHz").Code);
    }

    [Fact]
    public void SetupFile_IsUnfoldedByTheServiceTheProgramIsGiven()
    {
        var setup = Path.Combine(_dir, "setup.toml");
        File.WriteAllText(setup, "# simulated setup\n");

        // The unfold is passed in (CliServices), not set in a static: here a stand-in returning a simulated line
        // list (two lines 40 dB apart) records the path it was asked for.
        string? seen = null;
        var services = new CliServices
        {
            UnfoldForModes = (path, _) =>
            {
                seen = path;
                return new ModeInput([new(0, 1e6, 1, 0.01, null), new(3e10, 1e6, 1e-4, 1e-5, null)], 1e-5, true, null, null);
            },
        };
        var outDir = Path.Combine(_dir, "from-setup");
        var o = new StringWriter();
        var e = new StringWriter();
        var code = OrderUnfold.Cli.Cli.Run(["modes", setup, "--out", outDir, "--require-smsr", "30dB"], o, e, services: services);
        Assert.True(code == 0, e.ToString());
        Assert.Equal(setup, seen);
        Assert.True(File.Exists(Path.Combine(outDir, "modes.json")));

        // A setup path that does not exist is bad input before any unfold.
        seen = null;
        Assert.Equal(2, OrderUnfold.Cli.Cli.Run(["modes", Path.Combine(_dir, "gone.toml")], o, e, services: services));
        Assert.Null(seen);
    }

    [Fact]
    public void Help_ListsTheCommandAndItsOptions()
    {
        var list = Run();
        Assert.Contains("modes", list.Out);
        var help = Run("help", "modes");
        Assert.Equal(0, help.Code);
        Assert.Contains("--require-smsr", help.Out);
        Assert.Contains("Exit codes: 0 PASS", help.Out);
    }
}
