using System.Globalization;
using OrderUnfold.Analysis;
using OrderUnfold.Pipeline;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>
/// The demo measurement (SIMULATED, data/demo) run through the whole pipeline with a setup that does not match it: a
/// stated FSR off by 0.07 %, 2 % or 10 %, a finesse guess 3× or ⅓ (free or held fixed), the sweep files swapped between
/// the cavities, an inverted signal. Each must give the demo's true lines (data/demo/truth.csv) or a refusal that names
/// the cause, and the refinement must stay within its iteration budget (counted iterations, not measured time).
/// </summary>
public class ModelMismatchTests(ITestOutputHelper output)
{
    private static string DemoDir()
    {
        for (var dir = new DirectoryInfo(AppContext.BaseDirectory); dir is not null; dir = dir.Parent)
        {
            var candidate = Path.Combine(dir.FullName, "data", "demo");
            if (File.Exists(Path.Combine(candidate, "setup.toml"))) return candidate;
        }

        throw new DirectoryNotFoundException("data/demo not found above the test folder");
    }

    /// <summary>The demo's true lines (frequency relative to the strongest, intensity), from data/demo/truth.csv.</summary>
    private static List<(double Hz, double Intensity)> Truth() =>
        File.ReadLines(Path.Combine(DemoDir(), "truth.csv"))
            .Where(l => l.Length > 0 && char.IsAsciiDigit(l.TrimStart('-')[0]))
            .Select(l => l.Split(','))
            .Select(f => (double.Parse(f[0], CultureInfo.InvariantCulture), double.Parse(f[1], CultureInfo.InvariantCulture)))
            .ToList();

    /// <summary>Writes the demo setup, edited, into a fresh folder with copies of the data files (setup paths stay inside
    /// the setup's folder); <paramref name="file"/> picks another source for a file (swapped, inverted). Returns its path.</summary>
    private static string Setup(Func<string, string> edit, Func<string, string>? file = null)
    {
        var demo = DemoDir();
        var text = File.ReadAllText(Path.Combine(demo, "setup.toml"));
        var dir = Directory.CreateTempSubdirectory("ou-mismatch-").FullName;
        foreach (var name in new[] { "A_source.csv", "B_source.csv", "A_calibration.csv", "B_calibration.csv" })
            File.Copy(file?.Invoke(name) ?? Path.Combine(demo, name), Path.Combine(dir, name));
        var path = Path.Combine(dir, "setup.toml");
        File.WriteAllText(path, edit(text));
        return path;
    }

    private static string ReplaceFirst(string text, string what, string with)
    {
        var at = text.IndexOf(what, StringComparison.Ordinal);
        Assert.True(at >= 0, $"'{what}' not in the demo setup");
        return text[..at] + with + text[(at + what.Length)..];
    }

    /// <summary>
    /// Runs the setup and checks the demo's six lines: each true line has one reported line within a tenth of the 10 MHz
    /// linewidth (the field-trace tolerance's 0.1 FWHM; shared/field-traces/README.md) and no other line is reported; the
    /// refinement ran, converged, and spent no more than its iteration budget.
    /// </summary>
    private UnfoldRun AssertTrueLines(string setupPath)
    {
        var run = UnfoldPipeline.Run(setupPath);
        foreach (var w in run.AllWarnings) output.WriteLine($"warning: {w}");
        foreach (var l in run.Result.Lines) output.WriteLine($"{l.FrequencyHz / 1e9,12:F6} GHz ± {l.FrequencySigmaHz / 1e3:F1} kHz  {l.Intensity:F4}");
        var d = run.Refinement!;
        output.WriteLine($"refinement: {d.IterationsUsed} of {d.IterationBudget} iterations, {d.Groups} group(s), budget: {d.BudgetExhausted ?? "not reached"}");
        Assert.True(run.Result.Refined);
        Assert.False(d.FellBackToGrid);
        Assert.Null(d.BudgetExhausted);
        Assert.InRange(d.IterationsUsed, 1, d.IterationBudget);
        var truth = Truth();
        Assert.Equal(truth.Count, run.Result.Lines.Count);
        foreach (var (hz, intensity) in truth)
        {
            var nearest = run.Result.Lines.MinBy(l => Math.Abs(l.FrequencyHz - hz))!;
            Assert.True(Math.Abs(nearest.FrequencyHz - hz) < 1e6, $"true line {hz / 1e9:F4} GHz: nearest reported {nearest.FrequencyHz / 1e9:F6} GHz");
            Assert.Equal(intensity, nearest.Intensity, 0.1 * intensity + 0.005);
        }

        return run;
    }

    private InputException AssertRefused(string setupPath, params string[] says)
    {
        var e = Assert.Throws<InputException>(() => UnfoldPipeline.Run(setupPath));
        output.WriteLine(e.Message);
        foreach (var s in says) Assert.Contains(s, e.Message);
        return e;
    }

    /// <summary>Cavity B's stated length 0.07 % long (93.766 mm for 93.7 mm): the grid absorbs the error with hundreds of
    /// weak lines, the line fit runs out of its budget on that poor fit and the run is refused naming the stated FSRs.</summary>
    [Fact]
    public void FsrRatioOff007PercentIsRefused() =>
        AssertRefused(Setup(t => t.Replace("length = \"93.7 mm\"", "length = \"93.76559 mm\"")), "ran out of its budget", "reduced χ²", "stated FSRs");

    /// <summary>The same with refine_fsr = true: the FSR ratio refined from the data puts every line right.</summary>
    [Fact]
    public void FsrRatioOff007PercentIsRefinedWhenAsked()
    {
        var run = AssertTrueLines(Setup(t => t.Replace("length = \"93.7 mm\"", "length = \"93.76559 mm\"").Replace("refine_fsr = false", "refine_fsr = true")));
        Assert.NotNull(run.FsrRefinement);
        Assert.Contains(run.FsrRefinement!.Instruments, i => i.Instrument == "B" && Math.Abs(Math.Abs(i.RelativeChange) - 0.0007) < 0.0002);
    }

    /// <summary>Cavity B's stated length 2 % long (95.574 mm for 93.7 mm), with and without refine_fsr: beyond what the folded
    /// peaks pin (several ratios explain the demo's six lines) and far beyond what the line fits can correct, so the run is
    /// refused naming the stated FSRs; the FSR refinement's line fits share a CPU budget, so this ends.</summary>
    [Theory]
    [InlineData("false")]
    [InlineData("true")]
    public void FsrOff2PercentIsRefusedWithTheCause(string refine) =>
        AssertRefused(Setup(t => t.Replace("length = \"93.7 mm\"", "length = \"95.574 mm\"").Replace("refine_fsr = false", $"refine_fsr = {refine}")),
            "reduced χ²", "stated FSR");

    /// <summary>A window of ±100 GHz, eight times the demo's unambiguous range (24 GHz), where lines and their aliases fit
    /// alike: the demo's six lines, or a refusal that names the cause; never a shorter line list that fits far worse than the
    /// grid (found: the line fit kept 4 of 6 lines at reduced χ² 23–37 against the grid's 1.2, exit 0, no warning).</summary>
    [Fact]
    public void AWindowFarWiderThanTheUnambiguousRangeGivesTheLinesOrARefusal()
    {
        var path = Setup(t => t.Replace("[solve]", "[solve]\nwindow = [\"-100 GHz\", \"100 GHz\"]"));
        try
        {
            AssertTrueLines(path);
        }
        catch (InputException e)
        {
            output.WriteLine(e.Message);
            Assert.True(e.Message.Contains("far worse than the grid") || e.Message.Contains("ran out of its budget"), e.Message);
            Assert.Contains("setup.toml", e.File ?? e.Message);
        }
    }

    /// <summary>The same window with the refinement off: the grid's lines are reported, but a warning says that their orders
    /// were not checked on a window eight times the unambiguous range (the grid reported 17 lines for six, silently).</summary>
    [Fact]
    public void AWideWindowWithoutRefinementWarnsThatOrdersAreUnchecked()
    {
        var run = UnfoldPipeline.Run(Setup(t => t.Replace("[solve]", "[solve]\nwindow = [\"-100 GHz\", \"100 GHz\"]").Replace("refine = true", "refine = false")));
        Assert.Contains(run.AllWarnings, w => w.Contains("wider than the unambiguous range") && w.Contains("refinement is off"));
    }

    /// <summary>Cavity B's stated length 10 % long: no ratio explains the data well; the run is refused, naming the reduced
    /// χ² and the stated FSR or the sweep assignment as the likely cause.</summary>
    [Fact]
    public void FsrOff10PercentIsRefusedWithTheCause() =>
        AssertRefused(Setup(t => t.Replace("length = \"93.7 mm\"", "length = \"103.07 mm\"")), "reduced χ²", "stated FSR", "sweep-to-instrument assignment");

    /// <summary>A finesse guess 3× or ⅓ of the true 150 (not fixed): the calibration peaks measure it, a warning says the
    /// stated value was replaced, and the lines are right.</summary>
    [Theory]
    [InlineData("450")]
    [InlineData("50")]
    public void FinesseGuessOffByThreeIsMeasured(string stated)
    {
        var run = AssertTrueLines(Setup(t => t.Replace("finesse = 150", $"finesse = {stated}")));
        Assert.Contains(run.AllWarnings, w => w.Contains("measured finesse") && w.Contains("using the measured value"));
    }

    /// <summary>The same guesses held fixed (fix_finesse = true): the calibration peaks contradict them by a factor 3, and
    /// a fit with the stated linewidth would give false or merged lines, so the run is refused naming both values.</summary>
    [Theory]
    [InlineData("450", "3.0× lower")]
    [InlineData("50", "3.0× higher")]
    public void FixedFinesseOffByThreeIsRefused(string stated, string says) =>
        AssertRefused(Setup(t => t.Replace("finesse = 150", $"finesse = {stated}").Replace("fix_finesse = false", "fix_finesse = true")),
            "fix_finesse = true keeps the stated finesse", says);

    /// <summary>Cavity A's source sweep negated (simulated from the demo file): refused before any fit, naming the file and
    /// that the peaks point down.</summary>
    [Fact]
    public void InvertedSignalIsRefused()
    {
        var dir = Directory.CreateTempSubdirectory("ou-inverted-").FullName;
        var inverted = Path.Combine(dir, "A_source_inverted.csv");
        File.WriteAllLines(inverted, File.ReadLines(Path.Combine(DemoDir(), "A_source.csv")).Select(line =>
        {
            var f = line.Split(',');
            return f.Length == 3 && double.TryParse(f[2], NumberStyles.Float, CultureInfo.InvariantCulture, out var v) && double.TryParse(f[0], NumberStyles.Float, CultureInfo.InvariantCulture, out _)
                ? $"{f[0]},{f[1]},{(-v).ToString("R", CultureInfo.InvariantCulture)}"
                : line;
        }));
        var e = AssertRefused(Setup(t => t, name => name == "A_source.csv" ? inverted : Path.Combine(DemoDir(), name)), "peaks point down", "inverted");
        Assert.Contains("A_source.csv", e.File ?? e.Message); // the inverted copy stands in for A_source.csv
    }

    /// <summary>The source files of the two cavities swapped: each sweep is read with the other cavity's axis and FSR; the
    /// grid cannot explain them and the run is refused, naming the assignment as a likely cause.</summary>
    [Fact]
    public void SwappedSweepFilesAreRefused() =>
        AssertRefused(Setup(t => t, name => Path.Combine(DemoDir(), name switch
        {
            "A_source.csv" => "B_source.csv",
            "B_source.csv" => "A_source.csv",
            _ => name,
        })), "reduced χ²", "sweep-to-instrument assignment");

    /// <summary>The inverted-signal test itself: a simulated transmission sweep passes, its negative does not, and pure
    /// noise (no peaks either way) passes.</summary>
    [Fact]
    public void InvertedSignalTestSeesOnlyDownwardPeaks()
    {
        var rng = new Random(1);
        var inst = new OrderUnfold.Instruments.Instrument("A", 1e9, 50);
        var y = Enumerable.Range(0, 2000).Select(i => inst.Transmission(3e9 * i / 2000.0) + 0.01 * OrderUnfold.Simulation.Simulator.Gaussian(rng)).ToArray();
        Assert.Null(UnfoldPipeline.InvertedSignal(y));
        Assert.NotNull(UnfoldPipeline.InvertedSignal(y.Select(v => -v).ToArray()));
        Assert.Null(UnfoldPipeline.InvertedSignal(Enumerable.Range(0, 2000).Select(_ => OrderUnfold.Simulation.Simulator.Gaussian(rng)).ToArray()));
    }
}
