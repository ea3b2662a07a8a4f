using System.Globalization;
using OrderUnfold.Analysis;
using OrderUnfold.Units;
using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Series;

namespace OrderUnfold.Plotting;

/// <summary>The alias margin of one design against the shift Δ.</summary>
/// <param name="Title">Plot title.</param>
/// <param name="Subtitle">Second line (design, span, verdict), or null.</param>
/// <param name="Curve">Corners of the margin curve from 0 to the span (<see cref="AliasMargin.Vertices"/>), sorted by Δ.</param>
/// <param name="ThresholdLinewidths">Required margin, drawn as a dashed line with the region below it shaded.</param>
/// <param name="MinimumShiftHz">Shifts below this are the line itself (shaded grey).</param>
/// <param name="Aliases">Local minima below the threshold, marked.</param>
/// <param name="Worst">The worst alias of the drawn curve, marked and labelled; null to leave out.</param>
/// <param name="WorstLabel">Legend entry and label prefix of <paramref name="Worst"/>.</param>
/// <param name="RepeatHz">Common period of the FSRs, drawn as a vertical line when it lies inside the plotted range.</param>
public sealed record MarginCurveInput(
    string Title,
    string? Subtitle,
    IReadOnlyList<MarginPoint> Curve,
    double ThresholdLinewidths,
    double MinimumShiftHz,
    IReadOnlyList<MarginPoint> Aliases,
    MarginPoint? Worst,
    double? RepeatHz,
    string WorstLabel = "worst alias");

/// <summary>The worst alias margin of each candidate length.</summary>
/// <param name="Title">Plot title.</param>
/// <param name="Subtitle">Second line, or null.</param>
/// <param name="LengthM">Candidate lengths, m.</param>
/// <param name="NominalMargin">Worst margin at the nominal length, linewidths (same length as <paramref name="LengthM"/>).</param>
/// <param name="RobustMargin">Worst margin over the length tolerance, linewidths; null when there is no tolerance.</param>
/// <param name="ThresholdLinewidths">Required margin, dashed.</param>
/// <param name="ChosenLengthM">The recommended length, marked; null for none.</param>
/// <param name="Stepped">True when the lengths form an evenly stepped range (drawn as a line); false for a catalogue (markers).</param>
/// <param name="ChosenLabel">Legend entry of the marked length.</param>
public sealed record CandidateMapInput(
    string Title,
    string? Subtitle,
    double[] LengthM,
    double[] NominalMargin,
    double[]? RobustMargin,
    double ThresholdLinewidths,
    double? ChosenLengthM,
    bool Stepped,
    string ChosenLabel = "recommended");

/// <summary>
/// Plots of the measurement planner: the alias margin against the shift for a design, and the map of the worst
/// margin against candidate length. Built and rendered with <see cref="Figure"/> (PNG in memory, then written
/// atomically, DejaVu Sans).
/// </summary>
public static class PlanPlots
{
    /// <summary>Pixel size of the margin-curve image.</summary>
    public static readonly (int Width, int Height) MarginCurveSize = (1200, 650);

    /// <summary>Pixel size of the candidate-map image.</summary>
    public static readonly (int Width, int Height) CandidateMapSize = (1200, 650);

    private static readonly OxyColor CurveColour = Palette.Blue;
    private static readonly OxyColor AliasColour = OxyColor.FromRgb(0xC0, 0x1E, 0x2E);
    private static readonly OxyColor WorstColour = OxyColor.FromRgb(0xD0, 0x7A, 0x00);
    private static readonly OxyColor NominalColour = OxyColor.FromRgb(0x9A, 0x9A, 0x9A);
    private static readonly OxyColor ThresholdColour = OxyColor.FromRgb(0x60, 0x60, 0x60);
    private static readonly OxyColor BelowFill = OxyColor.FromAColor(0x22, OxyColor.FromRgb(0xC0, 0x1E, 0x2E));
    private static readonly OxyColor SelfFill = OxyColor.FromAColor(0x30, OxyColor.FromRgb(0x80, 0x80, 0x80));
    private static readonly OxyColor RepeatColour = OxyColor.FromRgb(0x6A, 0x3D, 0x9A);

    private const string FullKey = "full";
    private const string ZoomKey = "zoom";

    /// <summary>
    /// The margin (linewidths) against the shift Δ, in two panels over one Δ axis: the whole curve on top and the
    /// same curve with the margin axis cut near the threshold beneath it. Each shows the exact piecewise linear
    /// curve, the required margin as a dashed line over a shaded band, the stretch near Δ = 0 that is the line itself in grey, every alias below the
    /// threshold as a red marker, the worst alias labelled, and the common period (exact repeat) as a vertical line
    /// when it lies in range. Δ is shown in GHz for spans of 2 GHz and more, MHz otherwise.
    /// </summary>
    public static void SaveMarginCurve(string path, MarginCurveInput input) =>
        Figure.Save(path, BuildMarginCurve(input), MarginCurveSize);

    /// <summary>
    /// Worst alias margin against candidate length (mm): the margin within tolerance as the main curve, the nominal
    /// margin in grey behind it, the required margin dashed and the recommended length marked.
    /// </summary>
    public static void SaveCandidateMap(string path, CandidateMapInput input) =>
        Figure.Save(path, BuildCandidateMap(input), CandidateMapSize);

    /// <summary>The margin curve as inline SVG for report.html.</summary>
    public static Pipeline.SvgFigure MarginCurveSvg(MarginCurveInput input) =>
        new("Alias margin against frequency shift (margin.png)", Figure.RenderSvg(BuildMarginCurve(input), MarginCurveSize.Width, MarginCurveSize.Height), MarginCurveSize.Width);

    /// <summary>The candidate map as inline SVG for report.html.</summary>
    public static Pipeline.SvgFigure CandidateMapSvg(CandidateMapInput input) =>
        new("Worst alias margin against the added cavity's length (candidates.png)", Figure.RenderSvg(BuildCandidateMap(input), CandidateMapSize.Width, CandidateMapSize.Height),
            CandidateMapSize.Width);

    internal static PlotModel BuildMarginCurve(MarginCurveInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        if (input.Curve.Count < 2) throw new ArgumentException($"the margin curve needs at least 2 points but got {input.Curve.Count}", nameof(input));
        var lo = input.Curve[0].DeltaHz;
        var hi = input.Curve[^1].DeltaHz;
        var scale = FrequencyAxisScale.For(hi - lo);
        var model = Figure.NewModel(input.Title, input.Subtitle);

        // Two panels over one Δ axis: the whole curve on top (its peaks reach 𝓕/2 linewidths), and beneath it the
        // same curve with the margin axis cut at five thresholds or 2.5 × the worst alias, where the aliases are.
        var peak = Math.Max(input.Curve.Max(p => p.MarginLinewidths), input.ThresholdLinewidths);
        var worstValue = input.Worst is MarginPoint wp && double.IsFinite(wp.MarginLinewidths) ? wp.MarginLinewidths : 0;
        var cut = Math.Min(peak, Math.Max(5 * input.ThresholdLinewidths, 2.5 * worstValue)) * 1.08;
        var fullMax = peak * 1.08;

        model.Axes.Add(Figure.Axis(AxisPosition.Bottom, scale.Title("frequency shift Δ between two lines"),
            scale.FromHertz(lo), scale.FromHertz(hi), scale.TickFormat(hi - lo)));
        model.Axes.Add(Figure.PanelAxis(FullKey, "alias margin (linewidths)", 0.45, 1, minimum: 0, maximum: fullMax));
        model.Axes.Add(Figure.PanelAxis(ZoomKey, "zoom (linewidths)", 0, 0.38, minimum: 0, maximum: cut));

        foreach (var key in new[] { FullKey, ZoomKey })
        {
            var panel = new MarginPanel(key, key == FullKey ? fullMax : cut, key == ZoomKey);
            AddRequiredMargin(model, scale.FromHertz(lo), scale.FromHertz(hi), input.ThresholdLinewidths, key, panel.InLegend);
            if (input.MinimumShiftHz > lo) AddSelfRegion(model, input.MinimumShiftHz, lo, hi, scale, panel);

            var curve = new LineSeries { Title = "alias margin", Color = CurveColour, StrokeThickness = key == FullKey ? 1.0 : 1.3, YAxisKey = key, RenderInLegend = panel.InLegend };
            foreach (var p in input.Curve) curve.Points.Add(new DataPoint(scale.FromHertz(p.DeltaHz), p.MarginLinewidths));
            model.Series.Add(curve);
            if (input.RepeatHz is double rep && rep >= lo && rep <= hi) AddRepeat(model, rep, scale, key);

            if (input.Aliases.Count > 0)
            {
                var aliases = new ScatterSeries
                {
                    Title = $"alias below the threshold ({input.Aliases.Count})",
                    MarkerType = MarkerType.Circle,
                    MarkerSize = 4.5,
                    MarkerFill = AliasColour,
                    MarkerStroke = AliasColour,
                    YAxisKey = key,
                    RenderInLegend = panel.InLegend,
                };
                foreach (var a in input.Aliases) aliases.Points.Add(new ScatterPoint(scale.FromHertz(a.DeltaHz), a.MarginLinewidths));
                model.Series.Add(aliases);
            }

            if (input.Worst is MarginPoint w && double.IsFinite(w.DeltaHz)) AddWorst(model, input, w, lo, hi, scale, panel);
        }

        return model;
    }

    /// <summary>One panel of the margin curve: its axis key, the top of its margin axis, and whether its series appear in
    /// the legend (only the zoom panel's do, so each entry appears once).</summary>
    private sealed record MarginPanel(string Key, double Top, bool InLegend);

    /// <summary>The required margin: a shaded band from 0 up to it across <paramref name="x0"/>…<paramref name="x1"/> and
    /// a dashed line at it.</summary>
    private static void AddRequiredMargin(PlotModel model, double x0, double x1, double threshold, string? key = null, bool inLegend = true)
    {
        var band = new AreaSeries
        {
            Title = $"below required margin ({threshold:G3} linewidths)",
            Color = OxyColors.Transparent, Fill = BelowFill, StrokeThickness = 0, YAxisKey = key, RenderInLegend = inLegend,
        };
        band.Points.Add(new DataPoint(x0, threshold));
        band.Points.Add(new DataPoint(x1, threshold));
        band.Points2.Add(new DataPoint(x0, 0));
        band.Points2.Add(new DataPoint(x1, 0));
        model.Series.Add(band);
        model.Annotations.Add(new LineAnnotation
        {
            Type = LineAnnotationType.Horizontal,
            Y = threshold,
            Color = ThresholdColour,
            LineStyle = LineStyle.Dash,
            StrokeThickness = 1.2,
            YAxisKey = key,
        });
    }

    /// <summary>The shifts below the smallest counted one, which are the line itself: shaded grey over the panel's height.</summary>
    private static void AddSelfRegion(PlotModel model, double minimumShiftHz, double lo, double hi, FrequencyAxisScale scale, MarginPanel panel)
    {
        var self = new AreaSeries
        {
            Title = "the line itself (Δ < " + Quantity.FormatFrequency(minimumShiftHz, 3) + ")",
            Color = OxyColors.Transparent, Fill = SelfFill, StrokeThickness = 0, YAxisKey = panel.Key, RenderInLegend = panel.InLegend,
        };
        var x1 = scale.FromHertz(Math.Min(minimumShiftHz, hi));
        self.Points.Add(new DataPoint(scale.FromHertz(lo), panel.Top));
        self.Points.Add(new DataPoint(x1, panel.Top));
        self.Points2.Add(new DataPoint(scale.FromHertz(lo), 0));
        self.Points2.Add(new DataPoint(x1, 0));
        model.Series.Add(self);
    }

    /// <summary>The common period of the FSRs (exact repeat) as a vertical line, labelled on the full panel.</summary>
    private static void AddRepeat(PlotModel model, double repeatHz, FrequencyAxisScale scale, string key) => model.Annotations.Add(new LineAnnotation
    {
        Type = LineAnnotationType.Vertical,
        X = scale.FromHertz(repeatHz),
        Color = RepeatColour,
        LineStyle = LineStyle.DashDot,
        StrokeThickness = 1.4,
        YAxisKey = key,
        Text = key == FullKey ? "exact repeat " + Quantity.FormatFrequency(repeatHz) : null,
        TextColor = RepeatColour,
        TextOrientation = AnnotationTextOrientation.Vertical,
        TextHorizontalAlignment = HorizontalAlignment.Right,
        TextLinePosition = 0.98,
    });

    /// <summary>The worst alias as a highlighted diamond; on the zoom panel also its value as a label, on the side
    /// away from the nearer edge.</summary>
    private static void AddWorst(PlotModel model, MarginCurveInput input, MarginPoint w, double lo, double hi, FrequencyAxisScale scale, MarginPanel panel)
    {
        var wx = scale.FromHertz(w.DeltaHz);
        model.Series.Add(Highlight(input.WorstLabel, 7, wx, w.MarginLinewidths, panel.Key, panel.InLegend));
        if (panel.Key != ZoomKey) return;
        var right = wx > scale.FromHertz(lo + 0.7 * (hi - lo));
        var dx = 0.01 * scale.FromHertz(hi - lo) * (right ? -1 : 1);
        var cut = panel.Top;
        model.Annotations.Add(Label(
            $"{input.WorstLabel}: {w.MarginLinewidths.ToString("0.##", CultureInfo.InvariantCulture)} linewidths at {Quantity.FormatFrequency(w.DeltaHz)}",
            new DataPoint(wx + dx, Math.Min(w.MarginLinewidths + 0.06 * cut, 0.85 * cut)), right, 0xE0, panel.Key));
    }

    /// <summary>A highlighted point (worst alias, recommended length): a large diamond with a black outline.</summary>
    private static ScatterSeries Highlight(string title, double size, double x, double y, string? key = null, bool inLegend = true)
    {
        var mark = new ScatterSeries
        {
            Title = title,
            MarkerType = MarkerType.Diamond,
            MarkerSize = size,
            MarkerFill = WorstColour,
            MarkerStroke = OxyColors.Black,
            MarkerStrokeThickness = 0.8,
            YAxisKey = key,
            RenderInLegend = inLegend,
        };
        mark.Points.Add(new ScatterPoint(x, y));
        return mark;
    }

    /// <summary>A black 12 pt label on a translucent white background (opacity <paramref name="alpha"/>), left or right
    /// of its anchor.</summary>
    private static TextAnnotation Label(string text, DataPoint anchor, bool right, byte alpha, string? key = null) => new()
    {
        Text = text,
        TextPosition = anchor,
        TextHorizontalAlignment = right ? HorizontalAlignment.Right : HorizontalAlignment.Left,
        TextVerticalAlignment = VerticalAlignment.Bottom,
        Stroke = OxyColors.Transparent,
        Background = OxyColor.FromAColor(alpha, OxyColors.White),
        TextColor = OxyColors.Black,
        FontSize = 12,
        YAxisKey = key,
    };

    internal static PlotModel BuildCandidateMap(CandidateMapInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        if (input.LengthM.Length < 1) throw new ArgumentException("the candidate map needs at least one candidate", nameof(input));
        if (input.NominalMargin.Length != input.LengthM.Length)
            throw new ArgumentException($"{input.LengthM.Length} lengths but {input.NominalMargin.Length} nominal margins", nameof(input));
        if (input.RobustMargin is { } rm && rm.Length != input.LengthM.Length)
            throw new ArgumentException($"{input.LengthM.Length} lengths but {rm.Length} margins within tolerance", nameof(input));

        var order = Enumerable.Range(0, input.LengthM.Length).OrderBy(i => input.LengthM[i]).ToArray();
        var model = Figure.NewModel(input.Title, input.Subtitle);
        var all = input.NominalMargin.Concat(input.RobustMargin ?? []).Where(double.IsFinite).DefaultIfEmpty(0).Max();
        var yMax = Math.Max(all, input.ThresholdLinewidths) * 1.15;
        var lmin = input.LengthM.Min() * 1e3;
        var lmax = input.LengthM.Max() * 1e3;
        var pad = lmax > lmin ? 0.01 * (lmax - lmin) : 1;
        model.Axes.Add(Figure.Axis(AxisPosition.Bottom, "candidate cavity length (mm)", lmin - pad, lmax + pad));
        model.Axes.Add(Figure.Axis(AxisPosition.Left, "worst alias margin over the span (linewidths)", 0, yMax));
        AddRequiredMargin(model, lmin - pad, lmax + pad, input.ThresholdLinewidths);

        if (input.RobustMargin is { } robust)
        {
            model.Series.Add(MarginSeries(input, order, "nominal length", NominalColour, 0.9, input.NominalMargin));
            model.Series.Add(MarginSeries(input, order, "worst within length tolerance", CurveColour, 1.4, robust));
        }
        else
        {
            model.Series.Add(MarginSeries(input, order, "worst alias margin", CurveColour, 1.4, input.NominalMargin));
        }

        if (input.ChosenLengthM is double chosen)
        {
            var idx = order.MinBy(i => Math.Abs(input.LengthM[i] - chosen));
            var y = (input.RobustMargin ?? input.NominalMargin)[idx];
            model.Series.Add(Highlight(input.ChosenLabel, 8, chosen * 1e3, y));
            var right = chosen * 1e3 > lmin + 0.75 * (lmax - lmin);
            model.Annotations.Add(Label($"{Quantity.FormatLength(chosen)}: {y.ToString("0.##", CultureInfo.InvariantCulture)} linewidths",
                new DataPoint(chosen * 1e3, y + 0.03 * yMax), right, 0xD0));
        }

        return model;
    }

    /// <summary>One margin per candidate against its length in mm: a line over an evenly stepped range, markers for a catalogue.</summary>
    private static XYAxisSeries MarginSeries(CandidateMapInput input, int[] order, string title, OxyColor colour, double thickness, double[] values)
    {
        if (input.Stepped)
        {
            var s = new LineSeries { Title = title, Color = colour, StrokeThickness = thickness };
            foreach (var i in order) s.Points.Add(new DataPoint(input.LengthM[i] * 1e3, values[i]));
            return s;
        }

        var m = new ScatterSeries { Title = title, MarkerType = MarkerType.Circle, MarkerSize = 2 + thickness * 1.5, MarkerFill = colour, MarkerStroke = colour };
        foreach (var i in order) m.Points.Add(new ScatterPoint(input.LengthM[i] * 1e3, values[i]));
        return m;
    }
}
