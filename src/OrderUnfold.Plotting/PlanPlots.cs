using System.Globalization;
using OrderUnfold.Analysis;
using OrderUnfold.Io;
using OrderUnfold.Units;
using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Legends;
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
/// margin against candidate length. Rendered like <see cref="Plots"/> (SkiaSharp PNG in memory, then written
/// atomically, DejaVu Sans).
/// </summary>
public static class PlanPlots
{
    /// <summary>Pixel size of the margin-curve image.</summary>
    public static readonly (int Width, int Height) MarginCurveSize = (1200, 650);

    /// <summary>Pixel size of the candidate-map image.</summary>
    public static readonly (int Width, int Height) CandidateMapSize = (1200, 650);

    private static readonly OxyColor CurveColor = Palette.Blue;
    private static readonly OxyColor AliasColor = OxyColor.FromRgb(0xC0, 0x1E, 0x2E);
    private static readonly OxyColor WorstColor = OxyColor.FromRgb(0xD0, 0x7A, 0x00);
    private static readonly OxyColor NominalColor = OxyColor.FromRgb(0x9A, 0x9A, 0x9A);
    private static readonly OxyColor ThresholdColor = OxyColor.FromRgb(0x60, 0x60, 0x60);
    private static readonly OxyColor BelowFill = OxyColor.FromAColor(0x22, OxyColor.FromRgb(0xC0, 0x1E, 0x2E));
    private static readonly OxyColor SelfFill = OxyColor.FromAColor(0x30, OxyColor.FromRgb(0x80, 0x80, 0x80));
    private static readonly OxyColor RepeatColor = OxyColor.FromRgb(0x6A, 0x3D, 0x9A);

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
        Plots.Save(path, BuildMarginCurve(input), MarginCurveSize);

    /// <summary>
    /// Worst alias margin against candidate length (mm): the margin within tolerance as the main curve, the nominal
    /// margin in grey behind it, the required margin dashed and the recommended length marked.
    /// </summary>
    public static void SaveCandidateMap(string path, CandidateMapInput input) =>
        Plots.Save(path, BuildCandidateMap(input), CandidateMapSize);

    internal static PlotModel BuildMarginCurve(MarginCurveInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        if (input.Curve.Count < 2) throw new ArgumentException($"the margin curve needs at least 2 points but got {input.Curve.Count}", nameof(input));
        var lo = input.Curve[0].DeltaHz;
        var hi = input.Curve[^1].DeltaHz;
        var scale = FrequencyAxisScale.For(hi - lo);
        var model = Plots.NewModel(input.Title, input.Subtitle);

        // Two panels over one Δ axis: the whole curve on top (its peaks reach 𝓕/2 linewidths), and beneath it the
        // same curve with the margin axis cut at five thresholds or 2.5 × the worst alias, where the aliases are.
        var peak = Math.Max(input.Curve.Max(p => p.MarginLinewidths), input.ThresholdLinewidths);
        var worstValue = input.Worst is MarginPoint wp && double.IsFinite(wp.MarginLinewidths) ? wp.MarginLinewidths : 0;
        var cut = Math.Min(peak, Math.Max(5 * input.ThresholdLinewidths, 2.5 * worstValue)) * 1.08;
        var fullMax = peak * 1.08;

        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Bottom,
            Title = scale.Title("frequency shift Δ between two lines"),
            StringFormat = scale.TickFormat(hi - lo),
            Minimum = scale.FromHertz(lo),
            Maximum = scale.FromHertz(hi),
        }));
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Key = FullKey,
            Position = AxisPosition.Left,
            StartPosition = 0.45,
            EndPosition = 1,
            Title = "alias margin (linewidths)",
            Minimum = 0,
            Maximum = fullMax,
        }));
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Key = ZoomKey,
            Position = AxisPosition.Left,
            StartPosition = 0,
            EndPosition = 0.38,
            Title = "zoom (linewidths)",
            Minimum = 0,
            Maximum = cut,
        }));

        foreach (var key in new[] { FullKey, ZoomKey })
        {
            var top = key == FullKey ? fullMax : cut;
            var band = new AreaSeries
            {
                Title = $"below required margin ({input.ThresholdLinewidths:G3} linewidths)",
                Color = OxyColors.Transparent, Fill = BelowFill, StrokeThickness = 0, YAxisKey = key, RenderInLegend = key == ZoomKey,
            };
            band.Points.Add(new DataPoint(scale.FromHertz(lo), input.ThresholdLinewidths));
            band.Points.Add(new DataPoint(scale.FromHertz(hi), input.ThresholdLinewidths));
            band.Points2.Add(new DataPoint(scale.FromHertz(lo), 0));
            band.Points2.Add(new DataPoint(scale.FromHertz(hi), 0));
            model.Series.Add(band);
            if (input.MinimumShiftHz > lo)
            {
                var self = new AreaSeries
                {
                    Title = "the line itself (Δ < " + Quantity.FormatFrequency(input.MinimumShiftHz, 3) + ")",
                    Color = OxyColors.Transparent, Fill = SelfFill, StrokeThickness = 0, YAxisKey = key, RenderInLegend = key == ZoomKey,
                };
                var x1 = scale.FromHertz(Math.Min(input.MinimumShiftHz, hi));
                self.Points.Add(new DataPoint(scale.FromHertz(lo), top));
                self.Points.Add(new DataPoint(x1, top));
                self.Points2.Add(new DataPoint(scale.FromHertz(lo), 0));
                self.Points2.Add(new DataPoint(x1, 0));
                model.Series.Add(self);
            }

            var curve = new LineSeries { Title = "alias margin", Color = CurveColor, StrokeThickness = key == FullKey ? 1.0 : 1.3, YAxisKey = key, RenderInLegend = key == ZoomKey };
            foreach (var p in input.Curve) curve.Points.Add(new DataPoint(scale.FromHertz(p.DeltaHz), p.MarginLinewidths));
            model.Series.Add(curve);
            model.Annotations.Add(new LineAnnotation
            {
                Type = LineAnnotationType.Horizontal,
                Y = input.ThresholdLinewidths,
                Color = ThresholdColor,
                LineStyle = LineStyle.Dash,
                StrokeThickness = 1.2,
                YAxisKey = key,
            });

            if (input.RepeatHz is double rep && rep >= lo && rep <= hi)
            {
                model.Annotations.Add(new LineAnnotation
                {
                    Type = LineAnnotationType.Vertical,
                    X = scale.FromHertz(rep),
                    Color = RepeatColor,
                    LineStyle = LineStyle.DashDot,
                    StrokeThickness = 1.4,
                    YAxisKey = key,
                    Text = key == FullKey ? "exact repeat " + Quantity.FormatFrequency(rep) : null,
                    TextColor = RepeatColor,
                    TextOrientation = AnnotationTextOrientation.Vertical,
                    TextHorizontalAlignment = HorizontalAlignment.Right,
                    TextLinePosition = 0.98,
                });
            }

            if (input.Aliases.Count > 0)
            {
                var aliases = new ScatterSeries
                {
                    Title = $"alias below the threshold ({input.Aliases.Count})",
                    MarkerType = MarkerType.Circle,
                    MarkerSize = 4.5,
                    MarkerFill = AliasColor,
                    MarkerStroke = AliasColor,
                    YAxisKey = key,
                    RenderInLegend = key == ZoomKey,
                };
                foreach (var a in input.Aliases) aliases.Points.Add(new ScatterPoint(scale.FromHertz(a.DeltaHz), a.MarginLinewidths));
                model.Series.Add(aliases);
            }

            if (input.Worst is MarginPoint w && double.IsFinite(w.DeltaHz))
            {
                var worst = new ScatterSeries
                {
                    Title = input.WorstLabel,
                    MarkerType = MarkerType.Diamond,
                    MarkerSize = 7,
                    MarkerFill = WorstColor,
                    MarkerStroke = OxyColors.Black,
                    MarkerStrokeThickness = 0.8,
                    YAxisKey = key,
                    RenderInLegend = key == ZoomKey,
                };
                var wx = scale.FromHertz(w.DeltaHz);
                worst.Points.Add(new ScatterPoint(wx, w.MarginLinewidths));
                model.Series.Add(worst);
                if (key == ZoomKey)
                {
                    var right = wx > scale.FromHertz(lo + 0.7 * (hi - lo));
                    var dx = 0.01 * scale.FromHertz(hi - lo) * (right ? -1 : 1);
                    model.Annotations.Add(new TextAnnotation
                    {
                        Text = $"{input.WorstLabel}: {w.MarginLinewidths.ToString("0.##", CultureInfo.InvariantCulture)} linewidths at {Quantity.FormatFrequency(w.DeltaHz)}",
                        TextPosition = new DataPoint(wx + dx, Math.Min(w.MarginLinewidths + 0.06 * cut, 0.85 * cut)),
                        TextHorizontalAlignment = right ? HorizontalAlignment.Right : HorizontalAlignment.Left,
                        TextVerticalAlignment = VerticalAlignment.Bottom,
                        Stroke = OxyColors.Transparent,
                        Background = OxyColor.FromAColor(0xE0, OxyColors.White),
                        TextColor = OxyColors.Black,
                        FontSize = 12,
                        YAxisKey = key,
                    });
                }
            }
        }

        return model;
    }

    internal static PlotModel BuildCandidateMap(CandidateMapInput input)
    {
        ArgumentNullException.ThrowIfNull(input);
        if (input.LengthM.Length < 1) throw new ArgumentException("the candidate map needs at least one candidate", nameof(input));
        if (input.NominalMargin.Length != input.LengthM.Length)
            throw new ArgumentException($"{input.LengthM.Length} lengths but {input.NominalMargin.Length} nominal margins", nameof(input));
        if (input.RobustMargin is { } rm && rm.Length != input.LengthM.Length)
            throw new ArgumentException($"{input.LengthM.Length} lengths but {rm.Length} margins within tolerance", nameof(input));

        var order = Enumerable.Range(0, input.LengthM.Length).OrderBy(i => input.LengthM[i]).ToArray();
        var model = Plots.NewModel(input.Title, input.Subtitle);
        var all = input.NominalMargin.Concat(input.RobustMargin ?? []).Where(double.IsFinite).DefaultIfEmpty(0).Max();
        var yMax = Math.Max(all, input.ThresholdLinewidths) * 1.15;
        var lmin = input.LengthM.Min() * 1e3;
        var lmax = input.LengthM.Max() * 1e3;
        var pad = lmax > lmin ? 0.01 * (lmax - lmin) : 1;
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Bottom,
            Title = "candidate cavity length (mm)",
            Minimum = lmin - pad,
            Maximum = lmax + pad,
        }));
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Left,
            Title = "worst alias margin over the span (linewidths)",
            Minimum = 0,
            Maximum = yMax,
        }));

        var band = new AreaSeries { Title = $"below required margin ({input.ThresholdLinewidths:G3} linewidths)", Color = OxyColors.Transparent, Fill = BelowFill, StrokeThickness = 0 };
        band.Points.Add(new DataPoint(lmin - pad, input.ThresholdLinewidths));
        band.Points.Add(new DataPoint(lmax + pad, input.ThresholdLinewidths));
        band.Points2.Add(new DataPoint(lmin - pad, 0));
        band.Points2.Add(new DataPoint(lmax + pad, 0));
        model.Series.Add(band);
        model.Annotations.Add(new LineAnnotation
        {
            Type = LineAnnotationType.Horizontal,
            Y = input.ThresholdLinewidths,
            Color = ThresholdColor,
            LineStyle = LineStyle.Dash,
            StrokeThickness = 1.2,
        });

        XYAxisSeries Series(string title, OxyColor color, double thickness, double[] values)
        {
            if (input.Stepped)
            {
                var s = new LineSeries { Title = title, Color = color, StrokeThickness = thickness };
                foreach (var i in order) s.Points.Add(new DataPoint(input.LengthM[i] * 1e3, values[i]));
                return s;
            }

            var m = new ScatterSeries { Title = title, MarkerType = MarkerType.Circle, MarkerSize = 2 + thickness * 1.5, MarkerFill = color, MarkerStroke = color };
            foreach (var i in order) m.Points.Add(new ScatterPoint(input.LengthM[i] * 1e3, values[i]));
            return m;
        }

        if (input.RobustMargin is { } robust)
        {
            model.Series.Add(Series("nominal length", NominalColor, 0.9, input.NominalMargin));
            model.Series.Add(Series("worst within length tolerance", CurveColor, 1.4, robust));
        }
        else
        {
            model.Series.Add(Series("worst alias margin", CurveColor, 1.4, input.NominalMargin));
        }

        if (input.ChosenLengthM is double chosen)
        {
            var idx = order.MinBy(i => Math.Abs(input.LengthM[i] - chosen));
            var y = (input.RobustMargin ?? input.NominalMargin)[idx];
            var mark = new ScatterSeries
            {
                Title = input.ChosenLabel,
                MarkerType = MarkerType.Diamond,
                MarkerSize = 8,
                MarkerFill = WorstColor,
                MarkerStroke = OxyColors.Black,
                MarkerStrokeThickness = 0.8,
            };
            mark.Points.Add(new ScatterPoint(chosen * 1e3, y));
            model.Series.Add(mark);
            var right = chosen * 1e3 > lmin + 0.75 * (lmax - lmin);
            model.Annotations.Add(new TextAnnotation
            {
                Text = $"{Quantity.FormatLength(chosen)}: {y.ToString("0.##", CultureInfo.InvariantCulture)} linewidths",
                TextPosition = new DataPoint(chosen * 1e3, y + 0.03 * yMax),
                TextHorizontalAlignment = right ? HorizontalAlignment.Right : HorizontalAlignment.Left,
                TextVerticalAlignment = VerticalAlignment.Bottom,
                Stroke = OxyColors.Transparent,
                Background = OxyColor.FromAColor(0xD0, OxyColors.White),
                TextColor = OxyColors.Black,
                FontSize = 12,
            });
        }

        return model;
    }
}
