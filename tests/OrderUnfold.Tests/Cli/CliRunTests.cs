using System.Globalization;
using System.Security.Cryptography;
using System.Text.Json;
using OrderUnfold.Io;
using Xunit;
using Xunit.Abstractions;

// Namespace deliberately not OrderUnfold.Tests.Cli: a namespace named Cli under OrderUnfold.Tests would hide the
// OrderUnfold.Cli.Cli class from other test folders that write Cli.Cli.Run.
namespace OrderUnfold.Tests.CommandLine;

/// <summary><c>simulate</c> then <c>unfold</c>, and <c>init</c>, through <see cref="OrderUnfold.Cli.Cli.Run"/>. All data simulated.</summary>
public sealed class CliRunTests(ITestOutputHelper output) : IDisposable
{
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-cli-run-" + Guid.NewGuid().ToString("N")[..12]);

    public void Dispose()
    {
        try
        {
            Directory.Delete(_dir, recursive: true);
        }
        catch (IOException)
        {
            // best effort
        }
    }

    private static (int Code, string Out, string Err) Run(params string[] args) => CliRun.Run(args);

    private static string Sha256(string path) => Convert.ToHexString(SHA256.HashData(File.ReadAllBytes(path)));

    [Fact]
    public void SimulateThenUnfoldWritesCompleteOutputsAndLeavesInputsAlone()
    {
        var data = Path.Combine(_dir, "data");
        var sim = Run("simulate", "--out", data, "--lines", "0 GHz:1, 0.45 GHz:0.4, 2.2 GHz:0.6",
            "--span-fsr", "4", "--samples", "6000", "--seed", "5");
        Assert.True(sim.Code == 0, sim.Err);
        Assert.Contains("simulated", sim.Out);
        var setup = Path.Combine(data, "setup.toml");
        Assert.True(File.Exists(setup));
        // narrow window (the simulated lines lie within ±2.2 GHz of the strongest): [solve] is the last table
        File.AppendAllText(setup, "window = [\"-3 GHz\", \"3 GHz\"]\n");

        var inputs = Directory.GetFiles(data).ToDictionary(f => f, Sha256);
        var outDir = Path.Combine(_dir, "out");
        var (code, stdout, stderr) = Run("unfold", setup, "--out", outDir);
        output.WriteLine(stdout);
        output.WriteLine(stderr);
        Assert.Equal(0, code);
        Assert.DoesNotContain("   at ", stderr);

        // outputs
        foreach (var name in new[] { "report.json", "lines.csv", "spectrum.csv", "spectrum.png" })
            Assert.True(File.Exists(Path.Combine(outDir, name)), $"{name} missing");
        var pngs = Directory.GetFiles(outDir, "*.png");
        Assert.True(pngs.Length >= 2 + 4, $"{pngs.Length} PNGs"); // spectrum, 4 sweeps, calibrations
        foreach (var png in pngs)
        {
            var head = File.ReadAllBytes(png)[..8];
            Assert.Equal(new byte[] { 0x89, 0x50, 0x4E, 0x47, 0x0D, 0x0A, 0x1A, 0x0A }, head); // PNG signature (PNG spec, ISO/IEC 15948)
        }

        var linesCsv = File.ReadAllLines(Path.Combine(outDir, "lines.csv"));
        Assert.Contains("frequency_hz", linesCsv[0]);
        Assert.Contains("intensity", linesCsv[0]);
        var header = linesCsv[0].Split(',');
        var fCol = Array.IndexOf(header, "frequency_hz");
        var found = linesCsv.Skip(1).Select(l => double.Parse(l.Split(',')[fCol], CultureInfo.InvariantCulture)).ToList();
        // the three simulated lines (relative to the strongest) come back within 5 MHz (half a linewidth)
        foreach (var truth in new[] { 0.0, 0.45e9, 2.2e9 })
            Assert.Contains(found, f => Math.Abs(f - truth) < 5e6);

        var spectrum = File.ReadAllLines(Path.Combine(outDir, "spectrum.csv"));
        Assert.StartsWith("frequency_hz", spectrum[0]);
        Assert.True(spectrum.Length > 100);

        var reportText = File.ReadAllText(Path.Combine(outDir, "report.json"));
        Assert.DoesNotContain("NaN", reportText);
        Assert.DoesNotContain("Infinity", reportText);
        using (var report = JsonDocument.Parse(reportText))
            Assert.Equal(JsonValueKind.Object, report.RootElement.ValueKind);

        // inputs unchanged, nothing added to the input folder
        Assert.Equal(inputs.Keys.OrderBy(k => k), Directory.GetFiles(data).OrderBy(k => k));
        foreach (var (path, hash) in inputs) Assert.True(hash == Sha256(path), $"{Path.GetFileName(path)} was modified");

        // atomic writes leave no temporary file behind (AtomicFile writes ".name.pid.guid.tmp" then renames)
        Assert.Empty(Directory.GetFiles(outDir, "*.tmp", SearchOption.AllDirectories));
        Assert.Empty(Directory.GetFiles(data, "*.tmp", SearchOption.AllDirectories));
    }

    [Fact]
    public void InitWritesAReadableTemplateAndRefusesToOverwrite()
    {
        Directory.CreateDirectory(_dir);
        var path = Path.Combine(_dir, "setup.toml");
        var first = Run("init", path);
        Assert.Equal(0, first.Code);
        var text = File.ReadAllText(path);
        Assert.Equal(SetupReader.Template(), text);

        // the template names two data files; with them present it reads as a valid setup
        File.WriteAllText(Path.Combine(_dir, "coarse_scan.csv"), "ramp,signal\n0,1\n");
        File.WriteAllText(Path.Combine(_dir, "fine_scan.csv"), "t,ramp,signal\n0,0,1\n");
        var setup = SetupReader.ReadText(text, path);
        Assert.Equal(2, setup.Instruments.Count);
        Assert.Equal(2, setup.Sweeps.Count);

        // an existing file is kept unless --force
        File.WriteAllText(path, "# mine\n");
        var again = Run("init", path);
        Assert.Equal(2, again.Code);
        Assert.Contains("--force", again.Err);
        Assert.Equal("# mine\n", File.ReadAllText(path));
        var forced = Run("init", path, "--force");
        Assert.Equal(0, forced.Code);
        Assert.Equal(SetupReader.Template(), File.ReadAllText(path));
        Assert.Empty(Directory.GetFiles(_dir, "*.tmp"));
    }
}
