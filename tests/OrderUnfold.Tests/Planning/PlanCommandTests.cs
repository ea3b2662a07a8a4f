using OrderUnfold.Cli;
using Xunit;

namespace OrderUnfold.Tests.Planning;

/// <summary>The <c>plan</c> command end to end. Cavities and sources are invented (simulated).</summary>
public sealed class PlanCommandTests : IDisposable
{
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-plan-" + Guid.NewGuid().ToString("N"));

    public PlanCommandTests() => Directory.CreateDirectory(_dir);

    public void Dispose()
    {
        try
        {
            Directory.Delete(_dir, true);
        }
        catch (IOException)
        {
        }
    }

    private (int Code, string Out, string Err) Run(params string[] args)
    {
        var o = new StringWriter();
        var e = new StringWriter();
        var code = global::OrderUnfold.Cli.Cli.Run(["plan", .. args], o, e);
        return (code, o.ToString(), e.ToString());
    }

    [Fact]
    public void SearchWritesTableCsvAndBothImages()
    {
        var outDir = Path.Combine(_dir, "out");
        var (code, stdout, stderr) = Run("--first-length", "100 mm", "--first-geometry", "planar", "--finesse", "150", "--span", "20 GHz", "--margin", "3",
            "--second-min", "80 mm", "--second-max", "120 mm", "--step", "0.1 mm", "--tolerance", "0.05 mm", "--out", outDir);
        Assert.True(code == 0, stderr + stdout);
        Assert.Contains("Two-cavity designs, best 10 of 401", stdout);
        Assert.Contains("Recommended:", stdout);
        Assert.Contains("verdict: ok", stdout);

        var csv = File.ReadAllLines(Path.Combine(outDir, "plan.csv"));
        Assert.Equal(402, csv.Length);
        Assert.StartsWith("rank,cavities,cavity2_length_m", csv[0]);
        Assert.EndsWith(",ok", csv[1]);
        // read back through the same column groups
        var rows = OrderUnfold.Planning.PlanTable.Read(Path.Combine(outDir, "plan.csv"));
        Assert.Equal(401, rows.Count);
        Assert.Equal("ok", rows[0].Margins.Verdict);
        Assert.Equal(1, rows[0].Rank.Rank);
        var first = Assert.Single(rows[0].Cavities);
        Assert.InRange(first!.LengthM!.Value, 0.08, 0.12);
        Assert.Equal(0.05e-3, first.ToleranceM!.Value, 12);
        foreach (var png in new[] { "margin.png", "candidates.png" })
        {
            var bytes = File.ReadAllBytes(Path.Combine(outDir, png));
            Assert.True(bytes.Length > 10_000);
            Assert.Equal([0x89, (byte)'P', (byte)'N', (byte)'G'], bytes[..4]);
        }
    }

    [Fact]
    public void AGivenSmallIntegerRatioDesignIsReportedAsFailing()
    {
        var outDir = Path.Combine(_dir, "bad");
        var (code, stdout, _) = Run("--first-length", "100 mm", "--finesse", "150", "--span", "20 GHz", "--second-length", "150 mm", "--out", outDir);
        Assert.Equal(1, code);
        Assert.Contains("repeats in span", stdout);
        Assert.Contains("2·FSR₁ = 2.998 GHz = 3·FSR₂", stdout);
        Assert.True(File.Exists(Path.Combine(outDir, "margin.png")));
        Assert.False(File.Exists(Path.Combine(outDir, "candidates.png")));
    }

    [Fact]
    public void SetupFileCavitiesAreEvaluated()
    {
        File.WriteAllText(Path.Combine(_dir, "scan.csv"), "t,y\n0,1\n1,2\n");
        var setup = Path.Combine(_dir, "setup.toml");
        File.WriteAllText(setup, """
            [[instrument]]
            name = "long"
            length = "100 mm"
            finesse = 150

            [[instrument]]
            name = "short"
            length = "92.9 mm"
            finesse = 150

            [[sweep]]
            instrument = "long"
            file = "scan.csv"
            """);
        var (code, stdout, stderr) = Run("--setup", setup, "--span", "20 GHz", "--out", Path.Combine(_dir, "setup-out"));
        Assert.True(code == 0, stderr + stdout);
        Assert.Contains("reference: long", stdout);
        Assert.Contains("planned:   short", stdout);
        Assert.Contains("5.52", stdout); // worst alias of 100 mm + 92.9 mm (tests/reference/plan_margin_reference.csv)
    }

    [Fact]
    public void CatalogueSearchAndWhatIfRun()
    {
        var cat = Path.Combine(_dir, "stock.txt");
        File.WriteAllText(cat, "# spacers in stock (invented)\n150 mm, A-1\n92.9 mm, B-7\n75 mm, C-3\n");
        var outDir = Path.Combine(_dir, "cat");
        var (code, stdout, stderr) = Run("--first-length", "100 mm", "--finesse", "100", "--span", "3 GHz", "--catalogue", cat, "--out", outDir,
            "--simulate", "--lines", "0 GHz, 0.41 GHz:0.6", "--samples", "2000");
        Assert.True(code == 0, stderr + stdout);
        Assert.Contains("B-7", stdout);
        Assert.Contains("every line came back, no ghosts", stdout);
        Assert.True(File.Exists(Path.Combine(outDir, "candidates.png")));
    }

    [Theory]
    [InlineData(new[] { "--first-length", "100 mm", "--finesse", "150", "--span", "20", "--second-length", "90 mm" }, "has no unit")]
    [InlineData(new[] { "--first-length", "100 mm", "--span", "20 GHz", "--second-length", "90 mm" }, "--finesse is required")]
    [InlineData(new[] { "--first-length", "100 mm", "--finesse", "150", "--span", "20 GHz" }, "nothing to plan")]
    [InlineData(new[] { "--first-length", "100 mm", "--finesse", "150", "--span", "20 GHz", "--second-min", "80 mm", "--second-max", "90 mm" }, "missing --step")]
    [InlineData(new[] { "--first-length", "100 mm", "--finesse", "150", "--span", "20 GHz", "--second-length", "90 mm", "--first-geometry", "round" }, "planar or confocal")]
    [InlineData(new[] { "--first-length", "100 mm", "--finesse", "150", "--span", "20 GHz", "--second-length", "90 mm", "--lines", "0 GHz" }, "add --simulate")]
    [InlineData(new[] { "--first-length", "100 mm", "--finesse", "150", "--span", "20 GHz", "--second-length", "90 mm", "--simulate", "--lines", "0 GHz, 3 parsecs" }, "--lines")]
    [InlineData(new[] { "--first-fsr", "1.5 GHz", "--finesse", "150", "--span", "20 GHz", "--second-fsr", "1.6 GHz", "--tolerance", "0.1 mm", "--third-length", "70 mm" }, "")]
    public void BadInputGivesOneMessageAndExitTwo(string[] args, string expected)
    {
        var (code, stdout, stderr) = Run([.. args, "--out", Path.Combine(_dir, "x")]);
        if (expected.Length == 0)
        {
            // FSR-given cavities with a length tolerance: the tolerance applies only to the cavity with a length, which is fine
            Assert.True(code is 0 or 1, stderr);
            return;
        }

        Assert.Equal(2, code);
        Assert.Contains(expected, stderr);
        Assert.DoesNotContain("   at ", stderr); // no stack trace
    }

    [Fact]
    public void BadCatalogueLineIsLocated()
    {
        var cat = Path.Combine(_dir, "bad.txt");
        File.WriteAllText(cat, "93.7 mm\n 94,2 mm\n");
        var (code, _, stderr) = Run("--first-length", "100 mm", "--finesse", "150", "--span", "20 GHz", "--catalogue", cat, "--out", Path.Combine(_dir, "y"));
        Assert.Equal(2, code);
        Assert.StartsWith($"{cat}:2:2: ", stderr);
        Assert.Single(stderr.TrimEnd().Split('\n'));
    }
}
