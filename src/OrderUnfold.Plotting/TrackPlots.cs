using OrderUnfold.Io;
using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Series;

using OrderUnfold.Pipeline;

namespace OrderUnfold.Plotting;

/// <summary>Time-series plots of a batch (see <c>orderunfold track</c>), written as PNG atomically.</summary>
public static class TrackPlots
{
    /// <summary>Pixel size of both images.</summary>
    public static readonly (int Width, int Height) Size = (1200, 700);

    /// <summary>Most points drawn; longer series are thinned evenly (the CSV keeps them all).</summary>
    public const int MaxPoints = 60_000;

    /// <summary>Weakest intensity the colour scale shows, dB; weaker points take its colour.</summary>
    public const double FloorDb = -40;

    private static readonly OxyColor HopColour = Palette.Crimson;
    private static readonly OxyColor SeriesColour = Palette.Blue;

    /// <summary>
    /// Frequency against time, one dot per line per item, coloured by intensity (dB relative to the item's strongest
    /// line; colour bar on the right); mode hops are dashed vertical lines. The frequency axis is in MHz or GHz.
    /// </summary>
    public static void SaveTrack(string path, TrackPlotInput input) =>
        AtomicFile.WriteAllBytes(path, Figure.RenderPng(BuildTrack(input), Size.Width, Size.Height));

    /// <summary>A value against time (line with dots); mode hops are dashed vertical lines.</summary>
    public static void SaveSeries(string path, SeriesPlotInput input) =>
        AtomicFile.WriteAllBytes(path, Figure.RenderPng(BuildSeries(input), Size.Width, Size.Height));

    internal static PlotModel BuildTrack(TrackPlotInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        if (input.TimeS.Length != input.FrequencyHz.Length || input.TimeS.Length != input.IntensityDb.Length)
            throw new ArgumentException($"time ({input.TimeS.Length}), frequency ({input.FrequencyHz.Length}) and intensity ({input.IntensityDb.Length}) need the same length", nameof(input));
        var model = Figure.NewModel(input.Title, input.Subtitle);
        var scale = FrequencyAxisScale.ForValues(input.FrequencyHz.Where(double.IsFinite).DefaultIfEmpty(0));
        var span = FrequencyAxisScale.SpanHz(input.FrequencyHz.Where(double.IsFinite).DefaultIfEmpty(0));
        model.Axes.Add(TimeAxis(input.Origin, input.TimeS));
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Left,
            Title = scale.Title("frequency"),
            StringFormat = scale.TickFormat(span),
            MinimumPadding = 0.06,
            MaximumPadding = 0.06,
        }, axisLine: false));
        var finite = input.IntensityDb.Where(double.IsFinite).ToArray();
        var low = finite.Length == 0 ? FloorDb : Math.Max(FloorDb, Math.Floor(finite.Min() / 5) * 5);
        if (low > -5) low = -5;
        model.Axes.Add(new LinearColorAxis
        {
            Position = AxisPosition.Right,
            Key = "intensity",
            Title = "intensity (dB relative to the item's strongest line)",
            Palette = OxyPalettes.Viridis(200),
            Minimum = low,
            Maximum = 0,
            LowColor = OxyPalettes.Viridis(200).Colors[0],
            HighColor = OxyPalettes.Viridis(200).Colors[^1],
            MajorStep = low <= -20 ? 10 : 5,
        });

        var dots = new ScatterSeries
        {
            RenderInLegend = false,
            MarkerType = MarkerType.Circle,
            MarkerSize = input.TimeS.Length > 5000 ? 1.8 : 3.0,
            ColorAxisKey = "intensity",
            MarkerStrokeThickness = 0,
        };
        var step = Math.Max(1, (input.TimeS.Length + MaxPoints - 1) / MaxPoints);
        // weak points first, so that strong lines are drawn on top
        foreach (var i in Enumerable.Range(0, input.TimeS.Length).Where(i => i % step == 0).OrderBy(i => input.IntensityDb[i]))
        {
            if (!double.IsFinite(input.TimeS[i]) || !double.IsFinite(input.FrequencyHz[i]) || !double.IsFinite(input.IntensityDb[i])) continue;
            dots.Points.Add(new ScatterPoint(X(input.Origin, input.TimeS[i]), scale.FromHertz(input.FrequencyHz[i]), double.NaN, Math.Max(input.IntensityDb[i], low)));
        }

        model.Series.Add(dots);
        AddHops(model, input.Origin, input.HopTimesS);
        return model;
    }

    internal static PlotModel BuildSeries(SeriesPlotInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        if (input.TimeS.Length != input.Values.Length)
            throw new ArgumentException($"time ({input.TimeS.Length}) and values ({input.Values.Length}) need the same length", nameof(input));
        var model = Figure.NewModel(input.Title, input.Subtitle);
        model.Axes.Add(TimeAxis(input.Origin, input.TimeS));
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Left,
            Title = input.ValueTitle,
            MinimumPadding = 0.08,
            MaximumPadding = 0.08,
        }, axisLine: false));
        var line = new LineSeries
        {
            Title = input.ValueTitle,
            Color = SeriesColour,
            StrokeThickness = 1.0,
            MarkerType = input.TimeS.Length > 2000 ? MarkerType.None : MarkerType.Circle,
            MarkerSize = 2.2,
            MarkerFill = SeriesColour,
        };
        for (var i = 0; i < input.TimeS.Length; i++)
            line.Points.Add(double.IsFinite(input.Values[i]) ? new DataPoint(X(input.Origin, input.TimeS[i]), input.Values[i]) : DataPoint.Undefined);
        model.Series.Add(line);
        AddHops(model, input.Origin, input.HopTimesS);
        return model;
    }

    private static Axis TimeAxis(DateTimeOffset? origin, double[] timeS)
    {
        if (origin is null)
            return Palette.Gridded(new LinearAxis { Position = AxisPosition.Bottom, Title = "item (no time stamps)" }, axisLine: false);
        var span = timeS.Length > 1 ? timeS.Max() - timeS.Min() : 0;
        var format = span > 3 * 86400 ? "yyyy-MM-dd" : span > 86400 ? "MM-dd HH:mm" : span > 600 ? "HH:mm" : "HH:mm:ss";
        return Palette.Gridded(new DateTimeAxis
        {
            Position = AxisPosition.Bottom,
            Title = $"time (UTC, from {origin.Value.UtcDateTime:yyyy-MM-dd HH:mm:ss})",
            StringFormat = format,
        }, axisLine: false);
    }

    private static double X(DateTimeOffset? origin, double t) =>
        origin is DateTimeOffset o ? DateTimeAxis.ToDouble(o.UtcDateTime.AddSeconds(t)) : t;

    private static void AddHops(PlotModel model, DateTimeOffset? origin, double[] hopTimes)
    {
        var first = true;
        foreach (var t in hopTimes)
        {
            model.Annotations.Add(new LineAnnotation
            {
                Type = LineAnnotationType.Vertical,
                X = X(origin, t),
                Color = HopColour,
                LineStyle = LineStyle.Dash,
                StrokeThickness = 1.2,
                Text = first ? "mode hop" : null,
                TextColor = HopColour,
                TextOrientation = AnnotationTextOrientation.Horizontal,
                TextVerticalAlignment = VerticalAlignment.Top,
                TextHorizontalAlignment = HorizontalAlignment.Left,
            });
            first = false;
        }
    }
}
