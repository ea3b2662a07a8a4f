using OrderUnfold.Plotting;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Series;
using SkiaSharp;
using Xunit;

namespace OrderUnfold.Tests.Plotting;

/// <summary>
/// Rendering tests: every plot writes a real PNG of the stated size, atomically. All inputs are simulated
/// (see <see cref="SimulatedPlotInputs"/>). Set the environment variable ORDERUNFOLD_PLOT_SAMPLES to a
/// folder to also keep copies of the rendered images there (that is how docs/images is refreshed).
/// </summary>
public sealed class PlotsTests : IDisposable
{
    private static readonly byte[] PngSignature = [0x89, 0x50, 0x4E, 0x47, 0x0D, 0x0A, 0x1A, 0x0A];
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-plots-" + Guid.NewGuid().ToString("N"));

    public PlotsTests() => Directory.CreateDirectory(_dir);

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); } catch (IOException) { }
    }

    [Fact]
    public void SweepFit_WritesPngOfStatedSize() =>
        AssertWritesPng("sweep-fit-example.png", p => Plots.SaveSweepFit(p, SimulatedPlotInputs.Sweep()), Plots.SweepFitSize);

    [Fact]
    public void Spectrum_WritesPngOfStatedSize() =>
        AssertWritesPng("spectrum-example.png", p => Plots.SaveSpectrum(p, SimulatedPlotInputs.Spectrum()), Plots.SpectrumSize);

    [Fact]
    public void AxisCalibration_WritesPngOfStatedSize() =>
        AssertWritesPng("axis-calibration-example.png", p => Plots.SaveAxisCalibration(p, SimulatedPlotInputs.AxisCalibration()), Plots.AxisCalibrationSize);

    [Fact]
    public void FinesseFit_WritesPngOfStatedSize() =>
        AssertWritesPng("finesse-fit-example.png", p => Plots.SaveFinesseFit(p, SimulatedPlotInputs.Finesse()), Plots.FinesseFitSize);

    [Fact]
    public void Spectrum_WithoutOffsetOrLimit_WritesPng() =>
        AssertWritesPng("spectrum-relative.png", p => Plots.SaveSpectrum(p,
            SimulatedPlotInputs.Spectrum(absoluteOffsetHz: null) with { DetectionLimit = null }), Plots.SpectrumSize);

    [Fact]
    public void Save_ReplacesExistingFileAndCreatesFolder()
    {
        var path = Path.Combine(_dir, "nested", "sweep.png");
        Directory.CreateDirectory(Path.GetDirectoryName(path)!);
        File.WriteAllText(path, "old content");
        Plots.SaveSweepFit(path, SimulatedPlotInputs.Sweep());
        Assert.Equal(PngSignature, File.ReadAllBytes(path).Take(8).ToArray());
        Assert.Single(Directory.GetFiles(Path.GetDirectoryName(path)!));

        var fresh = Path.Combine(_dir, "made", "by", "save", "axis.png");
        Plots.SaveAxisCalibration(fresh, SimulatedPlotInputs.AxisCalibration());
        Assert.True(File.Exists(fresh));
    }

    [Fact]
    public void FailedSave_LeavesNoFileBehind()
    {
        var bad = SimulatedPlotInputs.Sweep() with { Model = new double[10] };
        var path = Path.Combine(_dir, "bad.png");
        var ex = Assert.Throws<ArgumentException>(() => Plots.SaveSweepFit(path, bad));
        Assert.Contains("2500", ex.Message);
        Assert.Contains("10", ex.Message);
        Assert.Empty(Directory.GetFiles(_dir));
    }

    [Theory]
    [InlineData(0.0, "MHz")]
    [InlineData(1.5e6, "MHz")]
    [InlineData(1.999e9, "MHz")]
    [InlineData(2.0e9, "GHz")]
    [InlineData(7.5e9, "GHz")]
    [InlineData(-3e9, "GHz")]
    [InlineData(double.NaN, "MHz")]
    public void FrequencyAxisScale_PicksUnitBySpan(double spanHz, string unit)
    {
        var scale = FrequencyAxisScale.For(spanHz);
        Assert.Equal(unit, scale.Unit);
        Assert.Equal(unit == "GHz" ? 1e9 : 1e6, scale.HertzPerUnit);
        Assert.Equal($"detuning ({unit})", scale.Title("detuning"));
    }

    [Fact]
    public void FrequencyAxisScale_ConvertsAndFormats()
    {
        Assert.Equal(1.5, FrequencyAxisScale.Gigahertz.FromHertz(1.5e9), 12);
        Assert.Equal(250, FrequencyAxisScale.Megahertz.FromHertz(250e6), 12);
        Assert.Equal(4e9, FrequencyAxisScale.SpanHz([1e9, double.NaN, 5e9, 3e9]));
        // Ticks about a tenth of the span apart: 8 GHz span -> 0.8 GHz steps need one decimal (plus one spare).
        Assert.Equal("0.##", FrequencyAxisScale.Gigahertz.TickFormat(8e9));
        Assert.Equal("0", FrequencyAxisScale.Megahertz.TickFormat(1.5e9));
        Assert.Equal("0.##", FrequencyAxisScale.Megahertz.TickFormat(1.5e6));
    }

    [Fact]
    public void SweepFit_AxisUnitFollowsSpan()
    {
        var wide = Plots.BuildSweepFit(SimulatedPlotInputs.Sweep(spanHz: 4.4e9));
        var narrow = Plots.BuildSweepFit(SimulatedPlotInputs.Sweep(spanHz: 1.2e9, fsrHz: 0.3e9));
        Assert.Equal("scan frequency shift (GHz)", BottomAxis(wide).Title);
        Assert.Equal("scan frequency shift (MHz)", BottomAxis(narrow).Title);

        // x starts at the sweep start and is drawn in the axis unit.
        var measured = (LineSeries)wide.Series[0];
        Assert.Equal(0, measured.Points[0].X, 12);
        var input = SimulatedPlotInputs.Sweep(spanHz: 4.4e9);
        Assert.Equal((input.ScanFrequencyHz[^1] - input.ScanFrequencyHz[0]) / 1e9, measured.Points[^1].X, 9);

        // Residual = measured − model, point by point.
        var residual = (LineSeries)wide.Series[2];
        Assert.Equal(input.Measured[100] - input.Model[100], residual.Points[100].Y, 12);

        Assert.Contains("cavity A", wide.Subtitle);
        Assert.Contains("FSR 1.500 GHz", wide.Subtitle);
        // 4.4 GHz from the start with FSR 1.5 GHz: marks at 0, 1.5, 3.0 GHz on each of two panels.
        Assert.Equal(6, wide.Annotations.OfType<LineAnnotation>().Count(a => a.Type == LineAnnotationType.Vertical));
    }

    [Fact]
    public void Spectrum_AbsoluteOffsetIsStatedExactlyInTitle()
    {
        var input = SimulatedPlotInputs.Spectrum(absoluteOffsetHz: 473.6123456789e12);
        var model = SpectrumPlot.Build(input);
        var x = BottomAxis(model);
        // GHz axis: X rounded to 1 MHz, i.e. 6 decimals in THz.
        Assert.Equal("frequency − 473.612346 THz (GHz)", x.Title);
        var lines = model.Series.OfType<ScatterErrorSeries>().SelectMany(s => s.Points).ToList();
        Assert.Equal(input.Lines.Count, lines.Count);
        // Line A sits at the offset itself: offset − rounded offset = −0.0211 MHz.
        var a = lines.Single(p => p.Y == 1.0);
        Assert.Equal((473.6123456789e12 - 473.612346e12) / 1e9, a.X, 9);

        var relative = SpectrumPlot.Build(input with { AbsoluteOffsetHz = null });
        Assert.Equal("frequency relative to anchor (GHz)", BottomAxis(relative).Title);
    }

    [Fact]
    public void Spectrum_DoubtfulLinesGetTheirOwnHollowSeries()
    {
        var model = SpectrumPlot.Build(SimulatedPlotInputs.Spectrum());
        var marks = model.Series.OfType<ScatterErrorSeries>().ToList();
        Assert.Equal(["line (summed over its bins)", "doubtful line"], marks.Select(s => s.Title));
        Assert.Equal(6, marks[0].Points.Count);
        Assert.Single(marks[1].Points);
        Assert.NotEqual(marks[1].MarkerStroke, marks[1].MarkerFill);
        // Error bars come from the sigmas, converted to the axis unit.
        Assert.Equal(9e6 / 1e9, marks[1].Points[0].ErrorX, 12);
        Assert.Contains(model.Series, s => s.Title == "detection limit");
        Assert.Equal(7, model.Annotations.OfType<TextAnnotation>().Count());
    }

    [Fact]
    public void Spectrum_MoreLinesThanLabelsFitLabelOnlyTheStrongestAndKeepTheAxis()
    {
        // 400 lines across the window (invented, as a misfit's grid has them): the labels that fit across the plot go to
        // the strongest lines, no leader leaves the window, and the subtitle says how many were labelled
        var input = SimulatedPlotInputs.Spectrum();
        var lo = input.GridHz[0];
        var hi = input.GridHz[^1];
        var lines = Enumerable.Range(0, 400).Select(k => new LineMark(lo + (hi - lo) * (k + 0.5) / 400, 0.01 + 0.002 * (k % 97), $"L{k}")).ToList();
        var model = SpectrumPlot.Build(input with { Lines = lines });
        var texts = model.Annotations.OfType<TextAnnotation>().ToList();
        Assert.InRange(texts.Count, 10, 60);
        Assert.Contains($"labels on the {texts.Count} strongest", model.Subtitle);
        var weakestLabelled = lines.Where(l => texts.Any(t => t.Text == l.Label)).Min(l => l.Intensity);
        Assert.DoesNotContain(lines, l => l.Intensity > weakestLabelled && texts.All(t => t.Text != l.Label));
        foreach (var leader in model.Series.OfType<LineSeries>().Where(s => !s.RenderInLegend))
            Assert.All(leader.Points, p => Assert.InRange(p.X, lo / 1e9 - 1e-9, hi / 1e9 + 1e-9));
    }

    [Fact]
    public void Spectrum_CrowdedLabelsAreSpreadWithLeaders()
    {
        var input = SimulatedPlotInputs.Spectrum();
        var model = SpectrumPlot.Build(input);
        var labels = model.Annotations.OfType<TextAnnotation>().ToDictionary(a => a.Text ?? "", a => a.TextPosition);
        var span = (input.GridHz[^1] - input.GridHz[0]) / 1e9;
        // D (2.905 GHz, 0.71) and E (2.965 GHz, 0.64) are 60 MHz apart on an ~8 GHz axis: their labels are
        // set side by side, one clearance apart, in line order, above the higher marker (D + its sigma).
        Assert.Equal(LineLabels.ClearanceX * span, labels["E"].X - labels["D"].X, 9);
        Assert.Equal(labels["D"].Y, labels["E"].Y, 12);
        Assert.Equal(0.71 + 0.015 + 0.03 * 0.71 + LineLabels.LiftY * (1.0 + 0.045), labels["D"].Y, 9);
        // Each of the two gets a leader from its marker; lone lines get none.
        var leaders = model.Series.OfType<LineSeries>().Where(s => !s.RenderInLegend).ToList();
        Assert.Equal(2, leaders.Count);
        // A lone label stays just above its marker (intensity + intensity sigma).
        Assert.Equal(1.0 + 0.015 + 0.03, labels["A"].Y, 12);
        Assert.Equal(0.0, labels["A"].X, 12);
        // The axis leaves room above the highest label.
        var y = model.Axes.Single(a => a.Position == AxisPosition.Left);
        Assert.True(y.Maximum > labels["D"].Y);
    }

    [Fact]
    public void AxisCalibration_ResidualsInMegahertz()
    {
        var input = SimulatedPlotInputs.AxisCalibration();
        var model = Plots.BuildAxisCalibration(input);
        var residuals = (ScatterSeries)model.Series[2];
        Assert.Equal(input.ResidualHz[3] / 1e6, residuals.Points[3].Y, 12);
        Assert.Contains(model.Axes, a => a.Title == "residual (MHz)");
        Assert.Contains(model.Axes, a => a.Title == "f(x) (GHz)");
        Assert.Equal("ramp voltage (V)", BottomAxis(model).Title);
        var rms = Math.Sqrt(input.ResidualHz.Average(r => r * r));
        Assert.Contains(OrderUnfold.Units.Quantity.FormatFrequency(rms, 3), model.Subtitle);
    }

    [Fact]
    public void FinesseFit_StatesFinesseWithUncertainty()
    {
        var model = Plots.BuildFinesseFit(SimulatedPlotInputs.Finesse());
        Assert.Equal("fitted finesse 151.4 ± 1.2", model.Subtitle);
        Assert.Equal("detuning (MHz)", BottomAxis(model).Title);
        Assert.Equal("152.3 ± 1.2", PlotFormat.WithSigma(152.31, 1.24));
        Assert.Equal("152 ± 25", PlotFormat.WithSigma(152.31, 25));
        Assert.Equal("152.3", PlotFormat.WithSigma(152.31, null));
    }

    [Fact]
    public void BadInputs_ThrowArgumentExceptionNamingTheProblem()
    {
        var sweep = SimulatedPlotInputs.Sweep();
        Assert.Contains("FSR", Assert.Throws<ArgumentException>(() => Plots.BuildSweepFit(sweep with { FsrHz = 0 })).Message);
        Assert.Contains("at least 2", Assert.Throws<ArgumentException>(() =>
            Plots.BuildSweepFit(sweep with { ScanFrequencyHz = [1], Measured = [1], Model = [1] })).Message);
        var spectrum = SimulatedPlotInputs.Spectrum();
        Assert.Contains("DetectionLimit", Assert.Throws<ArgumentException>(() =>
            SpectrumPlot.Build(spectrum with { DetectionLimit = [1, 2, 3] })).Message);
        var axis = SimulatedPlotInputs.AxisCalibration();
        Assert.Contains("ResidualHz", Assert.Throws<ArgumentException>(() =>
            Plots.BuildAxisCalibration(axis with { ResidualHz = [] })).Message);
    }

    private static Axis BottomAxis(OxyPlot.PlotModel model) => model.Axes.Single(a => a.Position == AxisPosition.Bottom);

    private void AssertWritesPng(string name, Action<string> save, (int Width, int Height) size)
    {
        var path = Path.Combine(_dir, name);
        save(path);

        // Only the target is left in the folder: the temporary file was renamed over it.
        Assert.Equal([path], Directory.GetFiles(_dir));
        var bytes = File.ReadAllBytes(path);
        Assert.True(bytes.Length > 5000, $"PNG suspiciously small: {bytes.Length} bytes");
        Assert.Equal(PngSignature, bytes.Take(8).ToArray());

        using var bitmap = SKBitmap.Decode(bytes);
        Assert.NotNull(bitmap);
        Assert.Equal(size.Width, bitmap.Width);
        Assert.Equal(size.Height, bitmap.Height);

        // Something was drawn: a fair share of pixels is not the white background.
        var inked = 0;
        for (var y = 0; y < bitmap.Height; y += 2)
        for (var x = 0; x < bitmap.Width; x += 2)
        {
            var c = bitmap.GetPixel(x, y);
            if (c.Red < 200 || c.Green < 200 || c.Blue < 200) inked++;
        }

        Assert.True(inked > bitmap.Width * bitmap.Height / 4 / 100, $"only {inked} inked pixels in a sample of the image");

        if (Environment.GetEnvironmentVariable("ORDERUNFOLD_PLOT_SAMPLES") is { Length: > 0 } keep)
        {
            Directory.CreateDirectory(keep);
            File.Copy(path, Path.Combine(keep, name), overwrite: true);
        }
    }
}
