using OxyPlot;
using OxyPlot.Axes;
using OxyPlot.Series;

namespace OrderUnfold.Plotting;

/// <summary>
/// The recovered spectrum (<see cref="Plots.SaveSpectrum"/>): grid intensities as stems, the detection limit as a
/// dashed curve, the lines as markers with error bars and labels (<see cref="LineLabels"/>), and the intensity axis
/// with headroom for the labels.
/// </summary>
internal static class SpectrumPlot
{
    private static readonly OxyColor SpectrumColour = Palette.Blue;
    private static readonly OxyColor LimitColour = Palette.MidGrey;

    public static PlotModel Build(SpectrumPlotInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        PlotInputChecks.RequireSamples(nameof(SpectrumPlotInput.GridHz), input.GridHz, 2);
        PlotInputChecks.RequireSameLength(nameof(SpectrumPlotInput.GridHz), input.GridHz, nameof(SpectrumPlotInput.Intensity), input.Intensity);
        if (input.DetectionLimit is { } limit)
            PlotInputChecks.RequireSameLength(nameof(SpectrumPlotInput.GridHz), input.GridHz, nameof(SpectrumPlotInput.DetectionLimit), limit);
        var lines = input.Lines ?? Array.Empty<LineMark>();

        var span = FrequencyAxisScale.SpanHz(input.GridHz.Concat(lines.Select(l => l.FrequencyHz)));
        var scale = FrequencyAxisScale.For(span);
        var (shiftHz, xTitle) = FrequencyAxis(input.AbsoluteOffsetHz, scale);
        double X(double hz) => scale.FromHertz(hz + shiftHz);

        var model = Figure.NewModel(input.Title, LineCountSubtitle(lines));
        model.Axes.Add(Figure.Axis(AxisPosition.Bottom, xTitle, format: scale.TickFormat(span)));
        var (yMin, yMax) = AddStems(model, input.GridHz, input.Intensity, X);
        if (input.DetectionLimit is { } dl)
        {
            var curve = new LineSeries
            {
                Title = "detection limit",
                Color = LimitColour,
                StrokeThickness = 1.2,
                LineStyle = LineStyle.Dash,
            };
            for (var i = 0; i < input.GridHz.Length; i++)
                curve.Points.Add(new DataPoint(X(input.GridHz[i]), dl[i]));
            model.Series.Add(curve);
        }

        var labels = LineLabels.AddMarkers(model, lines, X, scale, ref yMin, ref yMax);
        if (yMax <= 0) yMax = 1;
        var xs = input.GridHz.Where(double.IsFinite).Select(X).Concat(labels.Select(l => l.X)).ToList();
        var (xLow, xHigh) = xs.Count > 0 ? (xs.Min(), xs.Max()) : (0, 1);
        // more labels than fit across the plot would be spread far beyond it (the axis followed them: 427 lines of a
        // misfit stretched a 24 GHz window to 720 GHz); the strongest lines keep theirs, and the subtitle says so
        var capacity = LineLabels.Capacity(labels, scale.FromHertz(span), xLow, xHigh);
        if (labels.Count > capacity)
        {
            labels = labels.OrderByDescending(l => l.Line.Intensity).Take(capacity).ToList();
            model.Subtitle += $"; labels on the {capacity} strongest";
        }

        var labelTop = LineLabels.Place(model, labels, scale.FromHertz(span), yMax, xLow, xHigh);
        // Headroom for the line labels above the tallest marker.
        model.Axes.Add(Figure.Axis(AxisPosition.Left, "intensity (relative to strongest line)",
            minimum: yMin < 0 ? yMin * 1.1 : 0, maximum: Math.Max(yMax, labelTop) * 1.18));
        return model;
    }

    /// <summary>
    /// The shift applied to the frequencies and the axis title. With an absolute offset the axis shows (offset + f) − X,
    /// where X is the offset rounded to a thousandth of the axis unit so that the title can state it exactly and
    /// briefly in THz; without one, the frequency relative to the anchor.
    /// </summary>
    private static (double ShiftHz, string Title) FrequencyAxis(double? absoluteOffsetHz, FrequencyAxisScale scale)
    {
        if (absoluteOffsetHz is not { } offset) return (0, scale.Title("frequency relative to anchor"));
        if (!double.IsFinite(offset))
            throw new ArgumentException($"the absolute offset must be a finite frequency but got {offset} Hz", "input");
        var resolution = scale.HertzPerUnit / 1000;
        var rounded = Math.Round(offset / resolution) * resolution;
        return (offset - rounded, scale.Title($"frequency − {PlotFormat.Terahertz(rounded, resolution)}"));
    }

    /// <summary>The grid intensities as stems from zero; returns the range of the finite intensities (including 0).</summary>
    private static (double Min, double Max) AddStems(PlotModel model, double[] gridHz, double[] intensity, Func<double, double> x)
    {
        var stems = new StemSeries
        {
            Title = "recovered spectrum (per grid bin)",
            Color = SpectrumColour,
            StrokeThickness = 1.0,
            Base = 0,
        };
        var yMax = 0.0;
        var yMin = 0.0;
        for (var i = 0; i < gridHz.Length; i++)
        {
            var y = intensity[i];
            stems.Points.Add(new DataPoint(x(gridHz[i]), y));
            if (double.IsFinite(y))
            {
                yMax = Math.Max(yMax, y);
                yMin = Math.Min(yMin, y);
            }
        }

        model.Series.Add(stems);
        return (yMin, yMax);
    }

    private static string? LineCountSubtitle(IReadOnlyList<LineMark> lines)
    {
        if (lines.Count == 0) return "no lines marked";
        var doubtful = lines.Count(l => l.Doubtful);
        var text = $"{PlotFormat.Count(lines.Count, "line")} marked";
        return doubtful > 0 ? $"{text} ({doubtful} doubtful)" : text;
    }
}
