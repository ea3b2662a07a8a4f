using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Plotting;
using OxyPlot.Annotations;
using OxyPlot.Series;
using SkiaSharp;
using Xunit;
using static OrderUnfold.Tests.Analysis.RefinerFixtures;

namespace OrderUnfold.Tests.Analysis;

/// <summary>The line plots (dB spectrum with detection limit; zoom panels per line group), on SIMULATED refined results.</summary>
public class LinePlotsTests
{
    /// <summary>The alias-prone two-cavity case of <see cref="LineRefinerTests"/>: one secure and one doubtful line.</summary>
    private static UnfoldResult DoubtfulCase()
    {
        var a = new Instrument("A", 1.0e9, 100);
        var b = new Instrument("B", 1.10005e9, 110);
        var specA = new FixtureSweep(a, 4000, 3.2, 0.0, NoiseSigma: 0.01);
        var specB = new FixtureSweep(b, 4000, 3.2, 0.43e9, Gain: 0.9, NoiseSigma: 0.01);
        Line[] truth = [new(0, 1.0), new(0.4e9, 0.1), new(0.43e9, 0.05), new(5.2e9, 0.3)];
        var rng = new Random(11);
        var sweeps = new List<CalibratedSweep> { Sweep("A", specA, truth, rng), Sweep("B", specB, truth, rng) };
        return LineRefiner.Refine(sweeps, Grid(sweeps, [specA, specB], truth, -1e9, 12e9, true)).Result;
    }

    [Fact]
    public void WritesBothPngsWithTheDoubtfulLinesDrawnApart()
    {
        var result = DoubtfulCase();
        Assert.Contains(result.Lines, l => l.Verdict == OrderVerdict.Doubtful);
        var dir = Path.Combine(Path.GetTempPath(), "orderunfold-lineplots-test");
        var written = LinePlots.Write(dir, result, 10e6, "a statement about the unambiguous range that is long enough to need wrapping in the subtitle of the plot, which is about one hundred and fifty characters wide");
        Assert.Equal([Path.Combine(dir, LinePlots.SpectrumDbFile), Path.Combine(dir, LinePlots.LineGroupsFile)], written);
        using (var db = SKBitmap.Decode(File.ReadAllBytes(written[0])))
            Assert.Equal((LinePlots.SpectrumDbSize.Width, LinePlots.SpectrumDbSize.Height), (db.Width, db.Height));
        using (var groups = SKBitmap.Decode(File.ReadAllBytes(written[1])))
        {
            // two groups (0 … 430 MHz, and 5.2 GHz): two panels side by side under the header
            Assert.Equal(2 * LinePlots.PanelSize.Width, groups.Width);
            Assert.True(groups.Height > LinePlots.PanelSize.Height);
        }

        var model = LinePlots.BuildSpectrumDb(result, null);
        var series = model.Series.OfType<ScatterErrorSeries>().ToList();
        Assert.Contains(series, s => s.Title.Contains("doubtful") && s.MarkerFill == OxyPlot.OxyColors.White);
        Assert.Contains(series, s => s.Title.Contains("secure"));
        Assert.Contains(model.Series.OfType<LineSeries>(), s => s.Title == "detection limit" && s.LineStyle == OxyPlot.LineStyle.Dash);
        // one upright frequency label per line
        Assert.Equal(result.Lines.Count, model.Annotations.OfType<TextAnnotation>().Count(t => t.TextRotation == -90));
    }

    [Fact]
    public void DbValuesOfTheLinesAndTheLimitAreTenLog10()
    {
        var result = DoubtfulCase();
        var model = LinePlots.BuildSpectrumDb(result, null);
        var points = model.Series.OfType<ScatterErrorSeries>().SelectMany(s => s.Points).Select(p => p.Y).OrderBy(y => y).ToList();
        var expected = result.Lines.Select(l => 10 * Math.Log10(l.Intensity)).OrderBy(y => y).ToList();
        Assert.Equal(expected.Count, points.Count);
        for (var i = 0; i < expected.Count; i++) Assert.Equal(expected[i], points[i], 9);
        var limit = model.Series.OfType<LineSeries>().Single(s => s.Title == "detection limit");
        Assert.Equal(10 * Math.Log10(result.DetectionLimit![10]), limit.Points[10].Y, 9);
    }

    [Fact]
    public void NonFiniteValuesAreLeftOutAndNoLinesGiveOnlyTheDbPlot()
    {
        var result = DoubtfulCase();
        var limit = result.DetectionLimit!.ToArray();
        limit[5] = double.NaN;
        var odd = result with
        {
            Lines = [.. result.Lines, result.Lines[0] with { FrequencyHz = 1e9, Intensity = 0 }],
            DetectionLimit = limit,
        };
        var model = LinePlots.BuildSpectrumDb(odd, null);
        Assert.False(model.Series.OfType<LineSeries>().Single(s => s.Title == "detection limit").Points[5].IsDefined());
        Assert.Equal(result.Lines.Count, model.Series.OfType<ScatterErrorSeries>().Sum(s => s.Points.Count));

        var dir = Path.Combine(Path.GetTempPath(), "orderunfold-lineplots-empty");
        if (Directory.Exists(dir)) Directory.Delete(dir, true);
        var written = LinePlots.Write(dir, result with { Lines = [] }, 10e6);
        Assert.Equal([Path.Combine(dir, LinePlots.SpectrumDbFile)], written);
    }

    [Fact]
    public void LinesWithinHalfAGigahertzShareAGroup()
    {
        UnfoldedLine L(double hz) => new(hz, 1, 1, 10, 0, 0);
        var groups = LineGroupPanels.Groups([L(2e9), L(0), L(0.3e9), L(0.75e9), L(1.4e9)]);
        Assert.Equal([3, 1, 1], groups.Select(g => g.Count));
        Assert.Equal([0, 0.3e9, 0.75e9], groups[0].Select(l => l.FrequencyHz));
    }
}
