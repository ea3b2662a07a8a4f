using System.Globalization;
using OrderUnfold.Io;
using OrderUnfold.Units;
using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Legends;
using OxyPlot.Series;

namespace OrderUnfold.Plotting;

/// <summary>
/// Renders OxyPlot models to PNG files. Each file is rendered in memory and then written atomically
/// (<see cref="AtomicFile"/>), so a reader never sees a half-written image. Inputs with mismatched array
/// lengths or too few samples throw <see cref="ArgumentException"/>; non-finite samples are left out of
/// the drawing (a line breaks there).
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
    private static readonly OxyColor MeasuredColor = Palette.Charcoal;
    private static readonly OxyColor ModelColor = OxyColor.FromRgb(0xD0, 0x4A, 0x12);
    private static readonly OxyColor ResidualColor = Palette.Blue;
    private static readonly OxyColor SpectrumColor = Palette.Blue;
    private static readonly OxyColor LineMarkColor = Palette.Crimson;
    private static readonly OxyColor DoubtfulColor = Palette.Ochre;
    private static readonly OxyColor LimitColor = Palette.MidGrey;
    private static readonly OxyColor GuideColor = OxyColor.FromAColor(0x50, OxyColor.FromRgb(0x60, 0x60, 0x60));

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
        Save(path, BuildSweepFit(input), SweepFitSize);

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
        Save(path, BuildSpectrum(input), SpectrumSize);

    /// <summary>
    /// A sweep-axis calibration: the top panel shows the calibration points and the fitted curve f(x), the
    /// bottom panel the residuals of the points in MHz around a zero line. Image size
    /// <see cref="AxisCalibrationSize"/>.
    /// </summary>
    /// <param name="path">PNG file to write (replaced atomically; its folder is created if needed).</param>
    /// <param name="input">Points (x, f, residual: equal lengths, at least 1) and the curve (equal lengths, at least 2).</param>
    public static void SaveAxisCalibration(string path, AxisPlotInput input) =>
        Save(path, BuildAxisCalibration(input), AxisCalibrationSize);

    /// <summary>
    /// One transmission peak with the fitted Airy profile (top) and the residual (bottom), against the
    /// detuning in MHz; the subtitle gives the fitted finesse with its standard error when known.
    /// Image size <see cref="FinesseFitSize"/>.
    /// </summary>
    /// <param name="path">PNG file to write (replaced atomically; its folder is created if needed).</param>
    /// <param name="input">Detuning, measured and model arrays of equal length (at least 2).</param>
    public static void SaveFinesseFit(string path, FinessePlotInput input) =>
        Save(path, BuildFinesseFit(input), FinesseFitSize);

    // ---------------------------------------------------------------- models

    internal static PlotModel BuildSweepFit(SweepPlotInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        RequireSamples(nameof(SweepPlotInput.ScanFrequencyHz), input.ScanFrequencyHz, 2);
        RequireSameLength(nameof(SweepPlotInput.ScanFrequencyHz), input.ScanFrequencyHz, nameof(SweepPlotInput.Measured), input.Measured);
        RequireSameLength(nameof(SweepPlotInput.ScanFrequencyHz), input.ScanFrequencyHz, nameof(SweepPlotInput.Model), input.Model);
        if (!(input.FsrHz > 0) || !double.IsFinite(input.FsrHz))
            throw new ArgumentException($"the FSR must be a positive finite frequency but got {input.FsrHz} Hz", nameof(input));

        var start = FirstFinite(input.ScanFrequencyHz);
        var relative = input.ScanFrequencyHz.Select(f => f - start).ToArray();
        var span = FrequencyAxisScale.SpanHz(relative);
        var scale = FrequencyAxisScale.For(span);

        var subtitle = $"{input.InstrumentName} · FSR {Quantity.FormatFrequency(input.FsrHz)}";
        var model = NewModel(input.Title, subtitle);
        AddTwoPanelAxes(model, scale.Title("scan frequency shift"), scale.TickFormat(span),
            "signal (arb. units)", "residual (arb. units)");

        var measured = Line("measured", MeasuredColor, 1.0, TopKey);
        var fit = Line("model", ModelColor, 1.3, TopKey);
        var residual = Line("measured − model", ResidualColor, 0.8, BottomKey);
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

    internal static PlotModel BuildSpectrum(SpectrumPlotInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        RequireSamples(nameof(SpectrumPlotInput.GridHz), input.GridHz, 2);
        RequireSameLength(nameof(SpectrumPlotInput.GridHz), input.GridHz, nameof(SpectrumPlotInput.Intensity), input.Intensity);
        if (input.DetectionLimit is { } limit)
            RequireSameLength(nameof(SpectrumPlotInput.GridHz), input.GridHz, nameof(SpectrumPlotInput.DetectionLimit), limit);
        var lines = input.Lines ?? Array.Empty<LineMark>();

        var span = FrequencyAxisScale.SpanHz(input.GridHz.Concat(lines.Select(l => l.FrequencyHz)));
        var scale = FrequencyAxisScale.For(span);

        // With an absolute offset the axis shows (offset + f) − X, where X is the offset rounded to a
        // thousandth of the axis unit so that the title can state it exactly and briefly in THz.
        double shiftHz = 0;
        string xTitle;
        if (input.AbsoluteOffsetHz is { } offset)
        {
            if (!double.IsFinite(offset))
                throw new ArgumentException($"the absolute offset must be a finite frequency but got {offset} Hz", nameof(input));
            var resolution = scale.HertzPerUnit / 1000;
            var rounded = Math.Round(offset / resolution) * resolution;
            shiftHz = offset - rounded;
            xTitle = scale.Title($"frequency − {FormatTerahertz(rounded, resolution)}");
        }
        else
        {
            xTitle = scale.Title("frequency relative to anchor");
        }

        double X(double hz) => scale.FromHertz(hz + shiftHz);

        var model = NewModel(input.Title, LineCountSubtitle(lines));
        var xAxis = Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Bottom,
            Title = xTitle,
            StringFormat = scale.TickFormat(span),
        });
        model.Axes.Add(xAxis);

        var stems = new StemSeries
        {
            Title = "recovered spectrum (per grid bin)",
            Color = SpectrumColor,
            StrokeThickness = 1.0,
            Base = 0,
        };
        var yMax = 0.0;
        var yMin = 0.0;
        for (var i = 0; i < input.GridHz.Length; i++)
        {
            var y = input.Intensity[i];
            stems.Points.Add(new DataPoint(X(input.GridHz[i]), y));
            if (double.IsFinite(y))
            {
                yMax = Math.Max(yMax, y);
                yMin = Math.Min(yMin, y);
            }
        }

        model.Series.Add(stems);

        if (input.DetectionLimit is { } dl)
        {
            var curve = new LineSeries
            {
                Title = "detection limit",
                Color = LimitColor,
                StrokeThickness = 1.2,
                LineStyle = LineStyle.Dash,
            };
            for (var i = 0; i < input.GridHz.Length; i++)
                curve.Points.Add(new DataPoint(X(input.GridHz[i]), dl[i]));
            model.Series.Add(curve);
        }

        var confident = LineMarkers("line (summed over its bins)", MarkerType.Circle, LineMarkColor, LineMarkColor);
        var doubtful = LineMarkers("doubtful line", MarkerType.Diamond, OxyColors.White, DoubtfulColor);
        var labels = new List<(double X, double Y, LineMark Line)>();
        foreach (var line in lines)
        {
            if (!double.IsFinite(line.FrequencyHz) || !double.IsFinite(line.Intensity)) continue;
            var ex = line.SigmaHz is { } sx && double.IsFinite(sx) ? Math.Abs(sx) / scale.HertzPerUnit : 0;
            var ey = line.IntensitySigma is { } sy && double.IsFinite(sy) ? Math.Abs(sy) : 0;
            var point = new ScatterErrorPoint(X(line.FrequencyHz), line.Intensity, ex, ey);
            (line.Doubtful ? doubtful : confident).Points.Add(point);
            yMax = Math.Max(yMax, line.Intensity + ey);
            yMin = Math.Min(yMin, line.Intensity - ey);
            if (!string.IsNullOrWhiteSpace(line.Label)) labels.Add((point.X, line.Intensity + ey, line));
        }

        if (confident.Points.Count > 0) model.Series.Add(confident);
        if (doubtful.Points.Count > 0) model.Series.Add(doubtful);

        if (yMax <= 0) yMax = 1;
        var xs = input.GridHz.Where(double.IsFinite).Select(X).Concat(labels.Select(l => l.X)).ToList();
        var labelTop = PlaceLineLabels(model, labels, scale.FromHertz(span), yMax, xs.Count > 0 ? xs.Min() : 0, xs.Count > 0 ? xs.Max() : 1);
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Left,
            Title = "intensity (relative to strongest line)",
            Minimum = yMin < 0 ? yMin * 1.1 : 0,
            // Headroom for the line labels above the tallest marker.
            Maximum = Math.Max(yMax, labelTop) * 1.18,
        }));
        return model;
    }

    internal static PlotModel BuildAxisCalibration(AxisPlotInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        RequireSamples(nameof(AxisPlotInput.PointX), input.PointX, 1);
        RequireSameLength(nameof(AxisPlotInput.PointX), input.PointX, nameof(AxisPlotInput.PointFrequencyHz), input.PointFrequencyHz);
        RequireSameLength(nameof(AxisPlotInput.PointX), input.PointX, nameof(AxisPlotInput.ResidualHz), input.ResidualHz);
        RequireSamples(nameof(AxisPlotInput.CurveX), input.CurveX, 2);
        RequireSameLength(nameof(AxisPlotInput.CurveX), input.CurveX, nameof(AxisPlotInput.CurveFrequencyHz), input.CurveFrequencyHz);

        var span = FrequencyAxisScale.SpanHz(input.PointFrequencyHz.Concat(input.CurveFrequencyHz));
        var scale = FrequencyAxisScale.For(span);
        var finiteResiduals = input.ResidualHz.Where(double.IsFinite).ToArray();
        var rms = finiteResiduals.Length > 0 ? Math.Sqrt(finiteResiduals.Average(r => r * r)) : double.NaN;
        var subtitle = $"{input.PointX.Length} calibration point{(input.PointX.Length == 1 ? "" : "s")} · rms residual {Quantity.FormatFrequency(rms, 3)}";

        var model = NewModel(input.Title, subtitle);
        var xLabel = string.IsNullOrWhiteSpace(input.XLabel) ? "scan coordinate x" : input.XLabel;
        AddTwoPanelAxes(model, xLabel, null, scale.Title("f(x)"), "residual (MHz)");

        var curve = Line("fitted f(x)", ModelColor, 1.5, TopKey);
        for (var i = 0; i < input.CurveX.Length; i++)
            curve.Points.Add(new DataPoint(input.CurveX[i], scale.FromHertz(input.CurveFrequencyHz[i])));

        var points = Markers("calibration points", MarkerType.Circle, 4, MeasuredColor, TopKey);
        var residuals = Markers("residual", MarkerType.Circle, 3.5, ResidualColor, BottomKey);
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
        RequireSamples(nameof(FinessePlotInput.DetuningHz), input.DetuningHz, 2);
        RequireSameLength(nameof(FinessePlotInput.DetuningHz), input.DetuningHz, nameof(FinessePlotInput.Measured), input.Measured);
        RequireSameLength(nameof(FinessePlotInput.DetuningHz), input.DetuningHz, nameof(FinessePlotInput.Model), input.Model);

        var scale = FrequencyAxisScale.Megahertz;
        var span = FrequencyAxisScale.SpanHz(input.DetuningHz);
        var model = NewModel(input.Title, "fitted finesse " + FormatWithSigma(input.Finesse, input.FinesseSigma));
        AddTwoPanelAxes(model, scale.Title("detuning"), scale.TickFormat(span), "signal (arb. units)", "residual (arb. units)");

        // Few samples: markers show them individually; many samples: a thin line is less cluttered.
        var many = input.DetuningHz.Length > 400;
        XYAxisSeries measured = many
            ? Line("measured", MeasuredColor, 1.0, TopKey)
            : Markers("measured", MarkerType.Circle, 2.5, MeasuredColor, TopKey);
        var fit = Line("Airy fit", ModelColor, 1.6, TopKey);
        XYAxisSeries residual = many
            ? Line("residual", ResidualColor, 0.8, BottomKey)
            : Markers("residual", MarkerType.Circle, 2.2, ResidualColor, BottomKey);
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

    // ---------------------------------------------------------------- rendering

    /// <summary>Renders a model to PNG bytes with OxyPlot's SkiaSharp exporter.</summary>
    internal static byte[] RenderPng(PlotModel model, int width, int height)
    {
        using var stream = new MemoryStream();
        var exporter = new OxyPlot.SkiaSharp.PngExporter { Width = width, Height = height };
        exporter.Export(model, stream);
        return stream.ToArray();
    }

    /// <summary>Renders a model to PNG and writes it atomically (shared by all plot classes).</summary>
    internal static void Save(string path, PlotModel model, (int Width, int Height) size)
    {
        ArgumentException.ThrowIfNullOrWhiteSpace(path);
        AtomicFile.WriteAllBytes(path, RenderPng(model, size.Width, size.Height));
    }

    // ---------------------------------------------------------------- building blocks

    /// <summary>A model in the project's style: DejaVu Sans, white background, legend in one row above the plot
    /// (shared by all plot classes).</summary>
    internal static PlotModel NewModel(string title, string? subtitle)
    {
        var model = new PlotModel
        {
            Title = title,
            Subtitle = subtitle,
            DefaultFont = FontFamily,
            DefaultFontSize = 12,
            TitleFontSize = 16,
            SubtitleFontSize = 12,
            Background = OxyColors.White,
            PlotAreaBorderThickness = new OxyThickness(0),
            Padding = new OxyThickness(8, 8, 16, 8),
        };
        // Legend above the plot area, in one row, so it never covers data.
        model.Legends.Add(new Legend
        {
            LegendPlacement = LegendPlacement.Outside,
            LegendPosition = LegendPosition.TopRight,
            LegendOrientation = LegendOrientation.Horizontal,
            LegendBorderThickness = 0,
            LegendFontSize = 12,
            LegendSymbolLength = 24,
            LegendItemSpacing = 16,
        });
        return model;
    }

    /// <summary>Shared bottom x axis with a tall top panel (data and model) and a short bottom panel (residuals).</summary>
    private static void AddTwoPanelAxes(PlotModel model, string xTitle, string? xFormat, string topTitle, string bottomTitle)
    {
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Bottom,
            Title = xTitle,
            StringFormat = xFormat,
        }));
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Key = TopKey,
            Position = AxisPosition.Left,
            Title = topTitle,
            StartPosition = 0.34,
            EndPosition = 1.0,
            MaximumPadding = 0.04,
            MinimumPadding = 0.04,
        }));
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Key = BottomKey,
            Position = AxisPosition.Left,
            Title = bottomTitle,
            StartPosition = 0.0,
            EndPosition = 0.27,
            MaximumPadding = 0.08,
            MinimumPadding = 0.08,
        }));
    }

    private static LineSeries Line(string title, OxyColor color, double thickness, string yKey) => new()
    {
        Title = title,
        Color = color,
        StrokeThickness = thickness,
        YAxisKey = yKey,
        LineJoin = LineJoin.Round,
    };

    private static ScatterSeries Markers(string title, MarkerType type, double size, OxyColor color, string yKey) => new()
    {
        Title = title,
        MarkerType = type,
        MarkerSize = size,
        MarkerFill = color,
        MarkerStroke = color,
        YAxisKey = yKey,
    };

    private static ScatterErrorSeries LineMarkers(string title, MarkerType type, OxyColor fill, OxyColor stroke) => new()
    {
        Title = title,
        MarkerType = type,
        MarkerSize = 5,
        MarkerFill = fill,
        MarkerStroke = stroke,
        MarkerStrokeThickness = 1.6,
        ErrorBarColor = stroke,
        ErrorBarStrokeThickness = 1.2,
        ErrorBarStopWidth = 3,
        MinimumErrorSize = 0.01,
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
                    Color = GuideColor,
                    StrokeThickness = 1,
                    LineStyle = LineStyle.Dash,
                    Layer = AnnotationLayer.BelowSeries,
                });
            }
        }

        return true;
    }

    /// <summary>Smallest horizontal distance (fraction of the axis span) kept between two line labels.</summary>
    internal const double LabelClearanceX = 0.03;

    /// <summary>Approximate width of one label character as a fraction of the plot width (11 pt text on a
    /// ~1100 px wide plot area); longer labels need more room.</summary>
    private const double LabelCharWidth = 0.0065;

    /// <summary>Height (fraction of the tallest marker) by which the labels of a crowded group are lifted
    /// above the group's highest marker.</summary>
    internal const double LabelLiftY = 0.08;

    /// <summary>
    /// Adds one text label above each line marker. Lines closer together than a label width (at least
    /// <see cref="LabelClearanceX"/> of the span) form a group; a lone line gets its label straight above the marker, a group gets its
    /// labels side by side (in the order of the lines), lifted above the group's highest marker, each joined
    /// to its marker by a thin leader. Returns the highest label anchor, so the axis can leave room for it.
    /// </summary>
    private static double PlaceLineLabels(PlotModel model, List<(double X, double Y, LineMark Line)> labels, double spanUnits, double yMax,
        double xLow, double xHigh)
    {
        var widest = labels.Count == 0 ? 0 : labels.Max(l => l.Line.Label.Length);
        var dx = Math.Max(spanUnits, 1e-12) * Math.Max(LabelClearanceX, (widest + 1) * LabelCharWidth);
        var lift = yMax * LabelLiftY;
        var sorted = labels.OrderBy(l => l.X).ToList();
        var top = 0.0;
        var i = 0;
        while (i < sorted.Count)
        {
            var j = i + 1;
            while (j < sorted.Count && sorted[j].X - sorted[j - 1].X < dx) j++;
            var group = sorted.GetRange(i, j - i);
            i = j;

            // keep every label inside the plot: a label centred near an edge would be cut (and lose its sign)
            double Inside(double first, double last)
            {
                var half = dx / 2;
                if (first - half < xLow) return xLow + half - first;
                if (last + half > xHigh) return xHigh - half - last;
                return 0;
            }

            if (group.Count == 1)
            {
                var (x, y, line) = group[0];
                var shift1 = Inside(x, x);
                if (shift1 == 0)
                {
                    AddLabel(model, line, x, y);
                    top = Math.Max(top, y);
                    continue;
                }
            }

            var labelY = group.Max(g => g.Y) + lift;
            var centre = (group[0].X + group[^1].X) / 2;
            centre += Inside(centre - (group.Count - 1) / 2.0 * dx, centre + (group.Count - 1) / 2.0 * dx);
            for (var k = 0; k < group.Count; k++)
            {
                var (x, y, line) = group[k];
                var labelX = centre + (k - (group.Count - 1) / 2.0) * dx;
                model.Series.Add(new LineSeries
                {
                    Color = line.Doubtful ? DoubtfulColor : LineMarkColor,
                    StrokeThickness = 0.7,
                    RenderInLegend = false,
                    Points = { new DataPoint(x, y), new DataPoint(labelX, labelY) },
                });
                AddLabel(model, line, labelX, labelY);
            }

            top = Math.Max(top, labelY);
        }

        return top;
    }

    private static void AddLabel(PlotModel model, LineMark line, double x, double y) => model.Annotations.Add(new TextAnnotation
    {
        Text = line.Label,
        TextPosition = new DataPoint(x, y),
        TextVerticalAlignment = VerticalAlignment.Bottom,
        TextHorizontalAlignment = HorizontalAlignment.Center,
        Offset = new ScreenVector(0, -7),
        Stroke = OxyColors.Transparent,
        Background = OxyColor.FromAColor(0xC8, OxyColors.White),
        Padding = new OxyThickness(2, 0, 2, 0),
        TextColor = line.Doubtful ? DoubtfulColor : LineMarkColor,
        FontSize = 11,
    });

    private static string? LineCountSubtitle(IReadOnlyList<LineMark> lines)
    {
        if (lines.Count == 0) return "no lines marked";
        var doubtful = lines.Count(l => l.Doubtful);
        var text = $"{lines.Count} line{(lines.Count == 1 ? "" : "s")} marked";
        return doubtful > 0 ? $"{text} ({doubtful} doubtful)" : text;
    }

    // ---------------------------------------------------------------- formatting and checks

    /// <summary>A frequency in THz with as many decimals as <paramref name="resolutionHz"/> needs, trailing zeros dropped.</summary>
    internal static string FormatTerahertz(double hz, double resolutionHz)
    {
        var decimals = (int)Math.Clamp(Math.Ceiling(-Math.Log10(resolutionHz / 1e12) - 1e-9), 0, 12);
        var text = (hz / 1e12).ToString("F" + decimals, CultureInfo.InvariantCulture);
        if (text.Contains('.')) text = text.TrimEnd('0').TrimEnd('.');
        return text + " THz";
    }

    /// <summary>"152.3 ± 1.2": the value rounded to the second significant digit of its uncertainty.</summary>
    internal static string FormatWithSigma(double value, double? sigma)
    {
        if (!double.IsFinite(value)) return "n/a";
        if (sigma is not { } s || !double.IsFinite(s) || s <= 0)
            return value.ToString("G4", CultureInfo.InvariantCulture);
        var decimals = (int)Math.Clamp(1 - Math.Floor(Math.Log10(s)), 0, 10);
        var format = "F" + decimals;
        return $"{value.ToString(format, CultureInfo.InvariantCulture)} ± {s.ToString(format, CultureInfo.InvariantCulture)}";
    }

    private static double FirstFinite(double[] values)
    {
        foreach (var v in values)
            if (double.IsFinite(v)) return v;
        throw new ArgumentException("the scan frequency axis has no finite value", nameof(values));
    }

    private static void RequireSamples(string name, double[]? values, int minimum)
    {
        if (values is null)
            throw new ArgumentException($"{name} is missing", name);
        if (values.Length < minimum)
            throw new ArgumentException($"{name} needs at least {minimum} sample{(minimum == 1 ? "" : "s")} but got {values.Length}", name);
    }

    private static void RequireSameLength(string name, double[] reference, string otherName, double[]? other)
    {
        if (other is null)
            throw new ArgumentException($"{otherName} is missing", otherName);
        if (other.Length != reference.Length)
            throw new ArgumentException($"{otherName} must have as many samples as {name} ({reference.Length}) but has {other.Length}", otherName);
    }
}
