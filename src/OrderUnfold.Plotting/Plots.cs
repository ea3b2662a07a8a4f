using OrderUnfold.Units;
using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Series;

namespace OrderUnfold.Plotting;

/// <summary>
/// The figures of an unfold: sweep fit, spectrum (<see cref="SpectrumPlot"/>), axis calibration and finesse fit, as PNG
/// files rendered and written by <see cref="Figure"/> (in memory, then atomically, so a reader never sees a
/// half-written image). Inputs with mismatched array lengths or too few samples throw <see cref="ArgumentException"/>;
/// non-finite samples are left out of the drawing (a line breaks there).
/// </summary>
public static class Plots
{
    /// <summary>Font family used for every text element, set explicitly so the output does not depend on
    /// which font the system would pick by default.</summary>
    public const string FontFamily = "DejaVu Sans";

    /// <summary>Pixel size of the sweep-fit image.</summary>
    public static readonly (int Width, int Height) SweepFitSize = (1200, 700);

    /// <summary>Pixel size of the spectrum image.</summary>
    public static readonly (int Width, int Height) SpectrumSize = (1200, 600);

    /// <summary>Pixel size of the axis-calibration image.</summary>
    public static readonly (int Width, int Height) AxisCalibrationSize = (1000, 700);

    /// <summary>Pixel size of the finesse-fit image.</summary>
    public static readonly (int Width, int Height) FinesseFitSize = (1000, 650);

    /// <summary>At most this many FSR marks are drawn on a sweep plot; more would only be clutter.</summary>
    private const int MaxFsrMarks = 40;

    // Palette: a dark neutral for measured data, saturated colours for fitted/derived quantities.
    private static readonly OxyColor MeasuredColour = Palette.Charcoal;
    private static readonly OxyColor ModelColour = OxyColor.FromRgb(0xD0, 0x4A, 0x12);
    private static readonly OxyColor ResidualColour = Palette.Blue;
    private static readonly OxyColor GuideColour = OxyColor.FromAColor(0x50, OxyColor.FromRgb(0x60, 0x60, 0x60));

    private const string TopKey = "top";
    private const string BottomKey = "bottom";

    /// <summary>
    /// One sweep against its model: the top panel shows the measured signal and the model, the bottom panel
    /// the residual (measured − model). The horizontal axis is the scan frequency shift relative to the first
    /// sample of the sweep, in GHz when the sweep spans at least 2 GHz and in MHz otherwise; faint vertical
    /// marks are drawn every FSR from the sweep start. Image size <see cref="SweepFitSize"/>.
    /// </summary>
    /// <param name="path">PNG file to write (replaced atomically; its folder is created if needed).</param>
    /// <param name="input">The sweep; all three arrays must have the same length (at least 2).</param>
    public static void SaveSweepFit(string path, SweepPlotInput input) =>
        Figure.Save(path, BuildSweepFit(input), SweepFitSize);

    /// <summary>
    /// The recovered spectrum: grid intensities as stems, the lines as markers with their labels (doubtful
    /// lines with a hollow diamond), error bars where <see cref="LineMark.SigmaHz"/> or
    /// <see cref="LineMark.IntensitySigma"/> is given, and the detection limit as a dashed curve when given.
    /// Intensities are drawn as given; the axis title states they are relative to the strongest line, so
    /// the caller normalises them. Image size <see cref="SpectrumSize"/>.
    /// </summary>
    /// <param name="path">PNG file to write (replaced atomically; its folder is created if needed).</param>
    /// <param name="input">Grid, intensities (same length as the grid, at least 2), lines and options.</param>
    public static void SaveSpectrum(string path, SpectrumPlotInput input) =>
        Figure.Save(path, SpectrumPlot.Build(input), SpectrumSize);

    /// <summary>
    /// A sweep-axis calibration: the top panel shows the calibration points and the fitted curve f(x), the
    /// bottom panel the residuals of the points in MHz around a zero line. Image size
    /// <see cref="AxisCalibrationSize"/>.
    /// </summary>
    /// <param name="path">PNG file to write (replaced atomically; its folder is created if needed).</param>
    /// <param name="input">Points (x, f, residual: equal lengths, at least 1) and the curve (equal lengths, at least 2).</param>
    public static void SaveAxisCalibration(string path, AxisPlotInput input) =>
        Figure.Save(path, BuildAxisCalibration(input), AxisCalibrationSize);

    /// <summary>
    /// One transmission peak with the fitted Airy profile (top) and the residual (bottom), against the
    /// detuning in MHz; the subtitle gives the fitted finesse with its standard error when known.
    /// Image size <see cref="FinesseFitSize"/>.
    /// </summary>
    /// <param name="path">PNG file to write (replaced atomically; its folder is created if needed).</param>
    /// <param name="input">Detuning, measured and model arrays of equal length (at least 2).</param>
    public static void SaveFinesseFit(string path, FinessePlotInput input) =>
        Figure.Save(path, BuildFinesseFit(input), FinesseFitSize);

    // ---------------------------------------------------------------- models

    internal static PlotModel BuildSweepFit(SweepPlotInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        PlotInputChecks.RequireSamples(nameof(SweepPlotInput.ScanFrequencyHz), input.ScanFrequencyHz, 2);
        PlotInputChecks.RequireSameLength(nameof(SweepPlotInput.ScanFrequencyHz), input.ScanFrequencyHz, nameof(SweepPlotInput.Measured), input.Measured);
        PlotInputChecks.RequireSameLength(nameof(SweepPlotInput.ScanFrequencyHz), input.ScanFrequencyHz, nameof(SweepPlotInput.Model), input.Model);
        if (!(input.FsrHz > 0) || !double.IsFinite(input.FsrHz))
            throw new ArgumentException($"the FSR must be a positive finite frequency but got {input.FsrHz} Hz", nameof(input));

        var start = PlotInputChecks.FirstFinite(input.ScanFrequencyHz);
        var relative = input.ScanFrequencyHz.Select(f => f - start).ToArray();
        var span = FrequencyAxisScale.SpanHz(relative);
        var scale = FrequencyAxisScale.For(span);

        var subtitle = $"{input.InstrumentName} · FSR {Quantity.FormatFrequency(input.FsrHz)}";
        var model = Figure.NewModel(input.Title, subtitle);
        AddTwoPanelAxes(model, scale.Title("scan frequency shift"), scale.TickFormat(span),
            "signal (arb. units)", "residual (arb. units)");

        var measured = Line("measured", MeasuredColour, 1.0, TopKey);
        var fit = Line("model", ModelColour, 1.3, TopKey);
        var residual = Line("measured − model", ResidualColour, 0.8, BottomKey);
        residual.RenderInLegend = false;
        for (var i = 0; i < relative.Length; i++)
        {
            var x = scale.FromHertz(relative[i]);
            measured.Points.Add(new DataPoint(x, input.Measured[i]));
            fit.Points.Add(new DataPoint(x, input.Model[i]));
            residual.Points.Add(new DataPoint(x, input.Measured[i] - input.Model[i]));
        }

        model.Series.Add(measured);
        model.Series.Add(fit);
        model.Series.Add(residual);

        if (AddFsrMarks(model, relative, input.FsrHz, scale))
            model.Subtitle += " · dashed lines every FSR from the sweep start";
        AddZeroLine(model, BottomKey);
        return model;
    }

    internal static PlotModel BuildAxisCalibration(AxisPlotInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        PlotInputChecks.RequireSamples(nameof(AxisPlotInput.PointX), input.PointX, 1);
        PlotInputChecks.RequireSameLength(nameof(AxisPlotInput.PointX), input.PointX, nameof(AxisPlotInput.PointFrequencyHz), input.PointFrequencyHz);
        PlotInputChecks.RequireSameLength(nameof(AxisPlotInput.PointX), input.PointX, nameof(AxisPlotInput.ResidualHz), input.ResidualHz);
        PlotInputChecks.RequireSamples(nameof(AxisPlotInput.CurveX), input.CurveX, 2);
        PlotInputChecks.RequireSameLength(nameof(AxisPlotInput.CurveX), input.CurveX, nameof(AxisPlotInput.CurveFrequencyHz), input.CurveFrequencyHz);

        var span = FrequencyAxisScale.SpanHz(input.PointFrequencyHz.Concat(input.CurveFrequencyHz));
        var scale = FrequencyAxisScale.For(span);
        var finiteResiduals = input.ResidualHz.Where(double.IsFinite).ToArray();
        var rms = finiteResiduals.Length > 0 ? Math.Sqrt(finiteResiduals.Average(r => r * r)) : double.NaN;
        var subtitle = $"{input.PointX.Length} calibration point{(input.PointX.Length == 1 ? "" : "s")} · rms residual {Quantity.FormatFrequency(rms, 3)}";

        var model = Figure.NewModel(input.Title, subtitle);
        var xLabel = string.IsNullOrWhiteSpace(input.XLabel) ? "scan coordinate x" : input.XLabel;
        AddTwoPanelAxes(model, xLabel, null, scale.Title("f(x)"), "residual (MHz)");

        var curve = Line("fitted f(x)", ModelColour, 1.5, TopKey);
        for (var i = 0; i < input.CurveX.Length; i++)
            curve.Points.Add(new DataPoint(input.CurveX[i], scale.FromHertz(input.CurveFrequencyHz[i])));

        var points = Markers("calibration points", MarkerType.Circle, 4, MeasuredColour, TopKey);
        var residuals = Markers("residual", MarkerType.Circle, 3.5, ResidualColour, BottomKey);
        residuals.RenderInLegend = false;
        for (var i = 0; i < input.PointX.Length; i++)
        {
            points.Points.Add(new ScatterPoint(input.PointX[i], scale.FromHertz(input.PointFrequencyHz[i])));
            residuals.Points.Add(new ScatterPoint(input.PointX[i], input.ResidualHz[i] / 1e6));
        }

        model.Series.Add(curve);
        model.Series.Add(points);
        model.Series.Add(residuals);
        AddZeroLine(model, BottomKey);
        return model;
    }

    internal static PlotModel BuildFinesseFit(FinessePlotInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        PlotInputChecks.RequireSamples(nameof(FinessePlotInput.DetuningHz), input.DetuningHz, 2);
        PlotInputChecks.RequireSameLength(nameof(FinessePlotInput.DetuningHz), input.DetuningHz, nameof(FinessePlotInput.Measured), input.Measured);
        PlotInputChecks.RequireSameLength(nameof(FinessePlotInput.DetuningHz), input.DetuningHz, nameof(FinessePlotInput.Model), input.Model);

        var scale = FrequencyAxisScale.Megahertz;
        var span = FrequencyAxisScale.SpanHz(input.DetuningHz);
        var model = Figure.NewModel(input.Title, "fitted finesse " + PlotFormat.WithSigma(input.Finesse, input.FinesseSigma));
        AddTwoPanelAxes(model, scale.Title("detuning"), scale.TickFormat(span), "signal (arb. units)", "residual (arb. units)");

        // Few samples: markers show them individually; many samples: a thin line is less cluttered.
        var many = input.DetuningHz.Length > 400;
        XYAxisSeries measured = many
            ? Line("measured", MeasuredColour, 1.0, TopKey)
            : Markers("measured", MarkerType.Circle, 2.5, MeasuredColour, TopKey);
        var fit = Line("Airy fit", ModelColour, 1.6, TopKey);
        XYAxisSeries residual = many
            ? Line("residual", ResidualColour, 0.8, BottomKey)
            : Markers("residual", MarkerType.Circle, 2.2, ResidualColour, BottomKey);
        residual.RenderInLegend = false;

        for (var i = 0; i < input.DetuningHz.Length; i++)
        {
            var x = scale.FromHertz(input.DetuningHz[i]);
            var r = input.Measured[i] - input.Model[i];
            fit.Points.Add(new DataPoint(x, input.Model[i]));
            if (measured is LineSeries ml) ml.Points.Add(new DataPoint(x, input.Measured[i]));
            else ((ScatterSeries)measured).Points.Add(new ScatterPoint(x, input.Measured[i]));
            if (residual is LineSeries rl) rl.Points.Add(new DataPoint(x, r));
            else ((ScatterSeries)residual).Points.Add(new ScatterPoint(x, r));
        }

        model.Series.Add(measured);
        model.Series.Add(fit);
        model.Series.Add(residual);
        AddZeroLine(model, BottomKey);
        return model;
    }

    // ---------------------------------------------------------------- building blocks

    /// <summary>Shared bottom x axis with a tall top panel (data and model) and a short bottom panel (residuals).</summary>
    private static void AddTwoPanelAxes(PlotModel model, string xTitle, string? xFormat, string topTitle, string bottomTitle)
    {
        model.Axes.Add(Figure.Axis(AxisPosition.Bottom, xTitle, format: xFormat));
        model.Axes.Add(Figure.PanelAxis(TopKey, topTitle, 0.34, 1.0, padding: 0.04));
        model.Axes.Add(Figure.PanelAxis(BottomKey, bottomTitle, 0.0, 0.27, padding: 0.08));
    }

    private static LineSeries Line(string title, OxyColor colour, double thickness, string yKey) => new()
    {
        Title = title,
        Color = colour,
        StrokeThickness = thickness,
        YAxisKey = yKey,
        LineJoin = LineJoin.Round,
    };

    private static ScatterSeries Markers(string title, MarkerType type, double size, OxyColor colour, string yKey) => new()
    {
        Title = title,
        MarkerType = type,
        MarkerSize = size,
        MarkerFill = colour,
        MarkerStroke = colour,
        YAxisKey = yKey,
    };

    private static void AddZeroLine(PlotModel model, string yKey) => model.Annotations.Add(new LineAnnotation
    {
        Type = LineAnnotationType.Horizontal,
        Y = 0,
        YAxisKey = yKey,
        Color = OxyColor.FromRgb(0x30, 0x30, 0x30),
        StrokeThickness = 0.8,
        LineStyle = LineStyle.Solid,
        Layer = AnnotationLayer.BelowSeries,
    });

    /// <summary>Faint dashed verticals at every multiple of the FSR from the sweep start, on both panels;
    /// false (nothing drawn) when there would be more than <see cref="MaxFsrMarks"/>.</summary>
    private static bool AddFsrMarks(PlotModel model, double[] relativeHz, double fsrHz, FrequencyAxisScale scale)
    {
        var finite = relativeHz.Where(double.IsFinite).ToArray();
        if (finite.Length == 0) return false;
        var first = (long)Math.Ceiling(finite.Min() / fsrHz);
        var last = (long)Math.Floor(finite.Max() / fsrHz);
        if (last < first || last - first + 1 > MaxFsrMarks) return false;
        for (var k = first; k <= last; k++)
        {
            foreach (var key in new[] { TopKey, BottomKey })
            {
                model.Annotations.Add(new LineAnnotation
                {
                    Type = LineAnnotationType.Vertical,
                    X = scale.FromHertz(k * fsrHz),
                    YAxisKey = key,
                    Color = GuideColour,
                    StrokeThickness = 1,
                    LineStyle = LineStyle.Dash,
                    Layer = AnnotationLayer.BelowSeries,
                });
            }
        }

        return true;
    }
}
