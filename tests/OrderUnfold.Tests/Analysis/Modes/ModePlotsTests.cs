using OrderUnfold.Analysis.Modes;
using OrderUnfold.Plotting;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Series;
using SkiaSharp;
using Xunit;
using static OrderUnfold.Tests.Analysis.Modes.SimulatedModes;

namespace OrderUnfold.Tests.Analysis.Modes;

/// <summary>
/// The mode plot on simulated analyses. Set ORDERUNFOLD_PLOT_SAMPLES to a folder to keep the rendered example
/// there (docs/images/modes-example.png comes from <see cref="Example_WritesPngOfStatedSize"/>).
/// </summary>
public sealed class ModePlotsTests : IDisposable
{
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-modeplots-" + Guid.NewGuid().ToString("N"));

    public ModePlotsTests() => Directory.CreateDirectory(_dir);

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); } catch (IOException) { }
    }

    /// <summary>Simulated Fabry–Pérot diode laser (spacing 52.05 GHz): nine modes with k = +3 missing, a second
    /// family offset by 0.3 of the spacing about 15 dB down, one spurious line, detection limit 1e-3.</summary>
    internal static ModeAnalysis ExampleAnalysis()
    {
        var d = C / (2 * 3.6 * 0.8e-3);
        var rng = new Random(2024);
        var main = Comb(d, 0, new[] { -4, -3, -2, -1, 0, 1, 2, 4 }, k => Envelope(k, 0.05, 2.6), 5e6, 0.03, rng);
        var family = Comb(d, 0.3 * d, Enumerable.Range(-2, 4), k => 0.016 * Envelope(k, -0.5, 3), 5e6, 0.03, rng);
        var spurious = new ModeInputLine(1.62 * d, 5e6, 0.004, 0.0004, 4);
        return LaserModes.Analyse(Resolved(main.Concat(family).Append(spurious), 1e-3), new ModeAnalysisOptions { GroupIndex = 3.6 });
    }

    [Fact]
    public void Example_WritesPngOfStatedSize()
    {
        var path = Path.Combine(_dir, "modes.png");
        ModePlots.Save(path, ExampleAnalysis());
        using var bitmap = SKBitmap.Decode(path);
        Assert.Equal(ModePlots.Size.Width, bitmap.Width);
        Assert.Equal(ModePlots.Size.Height, bitmap.Height);
        Assert.Single(Directory.GetFiles(_dir));
        if (Environment.GetEnvironmentVariable("ORDERUNFOLD_PLOT_SAMPLES") is { Length: > 0 } samples)
        {
            Directory.CreateDirectory(samples);
            File.Copy(path, Path.Combine(samples, "modes-example.png"), overwrite: true);
        }
    }

    [Fact]
    public void Example_ShowsStemsEnvelopeSmsrAndFloor()
    {
        var a = ExampleAnalysis();
        var model = ModePlots.Build(a, "Laser modes");
        var titles = model.Series.Select(s => s.Title).ToList();
        Assert.Equal(["mode (main comb)", "second family", "off-comb line", "missing mode", "fitted envelope", "detection limit"], titles);

        var stems = (StemSeries)model.Series[0];
        Assert.Equal(a.Modes.Count, stems.Points.Count);
        // Stems in dB relative to the strongest, against the frequency from the strongest mode in GHz.
        Assert.Contains(stems.Points, p => p.X == 0 && p.Y == 0);
        var bottom = model.Axes.Single(x => x.Position == AxisPosition.Bottom);
        var left = model.Axes.Single(x => x.Position == AxisPosition.Left);
        Assert.Equal("frequency relative to the strongest mode (GHz)", bottom.Title);
        Assert.Equal("power relative to the strongest mode (dB)", left.Title);
        Assert.Equal(left.Minimum, stems.Base);
        Assert.True(left.Minimum < -30);

        var floor = (LineSeries)model.Series[^1];
        Assert.All(floor.Points, p => Assert.Equal(-30, p.Y, 9));

        var text = model.Annotations.OfType<TextAnnotation>().Single().Text;
        Assert.StartsWith("SMSR ", text);
        Assert.EndsWith(" dB", text);
        Assert.Equal(2, model.Annotations.OfType<ArrowAnnotation>().Count());
        Assert.Contains("spacing 52.0", model.Subtitle);
    }

    [Fact]
    public void FoldedAndAmbiguous_IsDrawnAgainstTheModeIndex()
    {
        var lines = Comb(C / (2 * 3.6 * 0.8e-3), 0, Enumerable.Range(-4, 9), k => Envelope(k, 0.3, 4.5), 2e6, 0.02, new Random(3));
        var a = LaserModes.Analyse(Folded(lines, 1.5e9));
        var model = ModePlots.Build(a, "Laser modes");
        Assert.StartsWith("mode index k", model.Axes.Single(x => x.Position == AxisPosition.Bottom).Title);
        Assert.Contains("spacing ambiguous", model.Subtitle);
        Assert.Equal(9, ((StemSeries)model.Series[0]).Points.Count);
        ModePlots.Save(Path.Combine(_dir, "folded.png"), a);
    }

    [Fact]
    public void SingleLine_ShowsTheLowerBound()
    {
        var a = LaserModes.Analyse(Resolved([new ModeInputLine(0, 1e6, 1, 0.01, null)], 1e-4));
        var model = ModePlots.Build(a, "Laser modes");
        Assert.Equal("SMSR ≥ 40 dB", model.Annotations.OfType<TextAnnotation>().Single().Text);
        ModePlots.Save(Path.Combine(_dir, "single.png"), a);

        var none = LaserModes.Analyse(Resolved([new ModeInputLine(0, 1e6, 1, 0.01, null)], null));
        Assert.Empty(ModePlots.Build(none, "Laser modes").Annotations.OfType<TextAnnotation>());
        ModePlots.Save(Path.Combine(_dir, "none.png"), none);
    }
}
