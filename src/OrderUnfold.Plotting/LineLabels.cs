using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Series;

namespace OrderUnfold.Plotting;

/// <summary>
/// The lines on the spectrum figure: markers with error bars (doubtful lines hollow, in their own series) and a text
/// label above each, spread apart with thin leaders where lines crowd together.
/// </summary>
internal static class LineLabels
{
    /// <summary>Smallest horizontal distance (fraction of the axis span) kept between two line labels.</summary>
    internal const double ClearanceX = 0.03;

    /// <summary>Approximate width of one label character as a fraction of the plot width (11 pt text on a
    /// ~1100 px wide plot area); longer labels need more room.</summary>
    private const double CharWidth = 0.0065;

    /// <summary>Height (fraction of the tallest marker) by which the labels of a crowded group are lifted
    /// above the group's highest marker.</summary>
    internal const double LiftY = 0.08;

    private static readonly OxyColor LineMarkColour = Palette.Crimson;
    private static readonly OxyColor DoubtfulColour = Palette.Ochre;

    /// <summary>
    /// Adds the markers of the finite lines (with ±σ bars where given) and widens the intensity range
    /// <paramref name="yMin"/>…<paramref name="yMax"/> to their bars; returns the labelled lines with their anchors.
    /// </summary>
    public static List<(double X, double Y, LineMark Line)> AddMarkers(PlotModel model, IReadOnlyList<LineMark> lines, Func<double, double> x,
        FrequencyAxisScale scale, ref double yMin, ref double yMax)
    {
        var confident = Markers("line (summed over its bins)", MarkerType.Circle, LineMarkColour, LineMarkColour);
        var doubtful = Markers("doubtful line", MarkerType.Diamond, OxyColors.White, DoubtfulColour);
        var labels = new List<(double X, double Y, LineMark Line)>();
        foreach (var line in lines)
        {
            if (!double.IsFinite(line.FrequencyHz) || !double.IsFinite(line.Intensity)) continue;
            var ex = line.SigmaHz is { } sx && double.IsFinite(sx) ? Math.Abs(sx) / scale.HertzPerUnit : 0;
            var ey = line.IntensitySigma is { } sy && double.IsFinite(sy) ? Math.Abs(sy) : 0;
            var point = new ScatterErrorPoint(x(line.FrequencyHz), line.Intensity, ex, ey);
            (line.Doubtful ? doubtful : confident).Points.Add(point);
            yMax = Math.Max(yMax, line.Intensity + ey);
            yMin = Math.Min(yMin, line.Intensity - ey);
            if (!string.IsNullOrWhiteSpace(line.Label)) labels.Add((point.X, line.Intensity + ey, line));
        }

        if (confident.Points.Count > 0) model.Series.Add(confident);
        if (doubtful.Points.Count > 0) model.Series.Add(doubtful);
        return labels;
    }

    /// <summary>How many labels fit side by side across the plot (<paramref name="xLow"/>…<paramref name="xHigh"/>, axis
    /// units): the plot width over one label's width (as <see cref="Place"/> spaces them), at least one.</summary>
    public static int Capacity(List<(double X, double Y, LineMark Line)> labels, double spanUnits, double xLow, double xHigh)
    {
        var dx = LabelWidth(labels, spanUnits);
        return Math.Max(1, (int)Math.Floor((xHigh - xLow) / dx));
    }

    /// <summary>Horizontal room one label takes (axis units), at least <see cref="ClearanceX"/> of the span.</summary>
    private static double LabelWidth(List<(double X, double Y, LineMark Line)> labels, double spanUnits)
    {
        var widest = labels.Count == 0 ? 0 : labels.Max(l => l.Line.Label.Length);
        return Math.Max(spanUnits, 1e-12) * Math.Max(ClearanceX, (widest + 1) * CharWidth);
    }

    /// <summary>
    /// Adds one text label above each line marker. Lines closer together than a label width (at least
    /// <see cref="ClearanceX"/> of the span) form a group; a lone line gets its label straight above the marker, a group
    /// gets its labels side by side (in the order of the lines), lifted above the group's highest marker, each joined
    /// to its marker by a thin leader. Returns the highest label anchor, so the axis can leave room for it.
    /// </summary>
    public static double Place(PlotModel model, List<(double X, double Y, LineMark Line)> labels, double spanUnits, double yMax,
        double xLow, double xHigh)
    {
        var dx = LabelWidth(labels, spanUnits);
        var lift = yMax * LiftY;
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
                    Color = line.Doubtful ? DoubtfulColour : LineMarkColour,
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

    private static ScatterErrorSeries Markers(string title, MarkerType type, OxyColor fill, OxyColor stroke) => new()
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
        TextColor = line.Doubtful ? DoubtfulColour : LineMarkColour,
        FontSize = 11,
    });
}
