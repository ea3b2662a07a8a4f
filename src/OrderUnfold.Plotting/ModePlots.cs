using System.Globalization;
using OrderUnfold.Analysis.Modes;
using OrderUnfold.Units;
using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Series;

namespace OrderUnfold.Plotting;

/// <summary>
/// The laser-mode picture: every line as a stem on a dB scale relative to the strongest, the fitted gain
/// envelope, the side-mode suppression ratio marked beside the strongest mode, and the detection-limit floor.
/// Built and rendered with <see cref="Figure"/> (PNG in memory, written atomically).
/// </summary>
public static class ModePlots
{
    /// <summary>Pixel size of the mode image.</summary>
    public static readonly (int Width, int Height) Size = (1200, 650);

    private static readonly OxyColor MainColour = Palette.Blue;
    private static readonly OxyColor SecondColour = OxyColor.FromRgb(0xD0, 0x7A, 0x12);
    private static readonly OxyColor OffColour = OxyColor.FromRgb(0x8C, 0x8C, 0x8C);
    private static readonly OxyColor EnvelopeColour = Palette.Crimson;
    private static readonly OxyColor SmsrColour = OxyColor.FromRgb(0x20, 0x20, 0x20);
    private static readonly OxyColor LimitColour = Palette.MidGrey;

    /// <summary>dB per neper of power: 10 / ln 10.</summary>
    private const double DbPerNeper = 10 / 2.302585092994046;

    /// <summary>Writes the mode plot of <paramref name="analysis"/> to <paramref name="path"/> (PNG, <see cref="Size"/>).</summary>
    public static void Save(string path, ModeAnalysis analysis, string title = "Laser modes") =>
        Figure.Save(path, Build(analysis, title), Size);

    /// <summary>The same figure as <see cref="Save"/>, as inline SVG for report.html.</summary>
    public static Pipeline.SvgFigure Svg(ModeAnalysis analysis, string title = "Laser modes") =>
        new($"Laser modes: lines, comb and gain envelope ({ModeOutputs.PngFileName})", Figure.RenderSvg(Build(analysis, title), Size.Width, Size.Height), Size.Width);

    /// <summary>
    /// Where things go on the mode plot. <see cref="ByFrequency"/>: the horizontal axis is the frequency relative to
    /// the strongest mode (orders resolved, or a folded reading chosen), else the mode index. The power axis runs from
    /// <see cref="Floor"/> (below the weakest line and the detection limit, in whole 10 dB steps) to <see cref="Top"/>.
    /// </summary>
    private sealed record ModeLayout(ModeAnalysis Analysis, bool ByFrequency, FrequencyAxisScale Scale, double MainReadHz, double Floor,
        double? LimitDb, double XMin, double XMax, double Pad)
    {
        public const double Top = 8;

        public double X(ModeLine l) => ByFrequency ? Scale.FromHertz(l.ReadFrequencyHz!.Value - MainReadHz) : l.K!.Value;

        public double XOfK(double k) => ByFrequency && Analysis.Spacing is { } s ? Scale.FromHertz(s.OriginHz + k * s.SpacingHz - MainReadHz) : k;

        public double SpanUnits => XMax - XMin + 2 * Pad;
    }

    private static ModeLayout Layout(ModeAnalysis a, List<ModeLine> plotted, bool byFrequency)
    {
        var mainRead = a.MainLine.ReadFrequencyHz ?? a.MainLine.FrequencyHz;
        var xsHz = byFrequency ? plotted.Select(l => l.ReadFrequencyHz!.Value - mainRead).ToList() : [];
        var scale = FrequencyAxisScale.For(byFrequency ? FrequencyAxisScale.SpanHz(xsHz.Append(0)) : 0);

        double? limitDb = a.DetectionLimit is { } d ? 10 * Math.Log10(d) : null;
        var lowest = plotted.Select(l => l.RelativeDb!.Value).Append(limitDb ?? 0).Append(-10).Min();
        var floor = Math.Floor((lowest - 6) / 10) * 10;

        var layout = new ModeLayout(a, byFrequency, scale, mainRead, floor, limitDb, 0, 0, 0);
        var xs = plotted.Select(layout.X).ToList();
        var xMin = xs.Count > 0 ? xs.Min() : -1;
        var xMax = xs.Count > 0 ? xs.Max() : 1;
        if (a.Comb is { } comb)
        {
            xMin = Math.Min(xMin, layout.XOfK(comb.FirstK));
            xMax = Math.Max(xMax, layout.XOfK(comb.LastK));
        }

        var pad = Math.Max((xMax - xMin) * 0.08, byFrequency ? scale.FromHertz(a.Spacing?.SpacingHz ?? 0) * 0.6 : 0.6);
        if (pad <= 0) pad = 1;
        return layout with { XMin = xMin, XMax = xMax, Pad = pad };
    }

    /// <summary>
    /// Builds the plot. The horizontal axis is the frequency relative to the strongest mode when the spacing is
    /// known (orders resolved, or a folded reading chosen), else the mode index (folded and ambiguous: lines off
    /// the comb cannot be placed and are left out).
    /// </summary>
    internal static PlotModel Build(ModeAnalysis a, string title)
    {
        ArgumentNullException.ThrowIfNull(a);
        var byFrequency = a.OrdersResolved || a.Spacing is not null;
        var plotted = a.Lines.Where(l => l.RelativeDb is not null && (byFrequency ? l.ReadFrequencyHz is not null : l.Role == LineRole.MainComb && l.K is not null)).ToList();
        var layout = Layout(a, plotted, byFrequency);
        var (floor, xMin, xMax, pad) = (layout.Floor, layout.XMin, layout.XMax, layout.Pad);

        var model = Figure.NewModel(title, Subtitle(a));
        var xAxis = Figure.Axis(AxisPosition.Bottom,
            byFrequency ? layout.Scale.Title("frequency relative to the strongest mode") : "mode index k (spacing ambiguous: see modes.json)",
            xMin - pad, xMax + pad, byFrequency ? layout.Scale.TickFormat(layout.Scale.HertzPerUnit * layout.SpanUnits) : "0");
        xAxis.MajorStep = byFrequency ? double.NaN : Math.Max(1, Math.Ceiling(layout.SpanUnits / 12));
        model.Axes.Add(xAxis);
        var yAxis = Figure.Axis(AxisPosition.Left, "power relative to the strongest mode (dB)", floor, ModeLayout.Top, "0");
        yAxis.MajorStep = (ModeLayout.Top - floor) > 60 ? 20 : 10;
        yAxis.MinorStep = 5;
        model.Axes.Add(yAxis);

        var others = plotted.Any(l => l.Role != LineRole.MainComb);
        AddStems(model, plotted.Where(l => l.Role == LineRole.MainComb), layout.X, floor, others ? "mode (main comb)" : "mode", MainColour, MarkerType.Circle);
        AddStems(model, plotted.Where(l => l.Role == LineRole.SecondFamily), layout.X, floor, "second family", SecondColour, MarkerType.Diamond);
        AddStems(model, plotted.Where(l => l.Role == LineRole.OffComb), layout.X, floor, "off-comb line", OffColour, MarkerType.Square);

        if (a.Comb is { MissingK.Count: > 0 } withGaps)
        {
            var miss = new ScatterSeries
            {
                Title = "missing mode",
                MarkerType = MarkerType.Cross,
                MarkerSize = 5,
                MarkerStroke = MainColour,
                MarkerStrokeThickness = 1.5,
            };
            foreach (var k in withGaps.MissingK) miss.Points.Add(new ScatterPoint(layout.XOfK(k), floor + 1.5));
            model.Series.Add(miss);
        }

        AddEnvelope(model, layout);
        if (layout.LimitDb is { } ld)
        {
            model.Series.Add(new LineSeries
            {
                Title = "detection limit",
                Color = LimitColour,
                StrokeThickness = 1.2,
                LineStyle = LineStyle.Dash,
                Points = { new DataPoint(xMin - pad, ld), new DataPoint(xMax + pad, ld) },
            });
        }

        AddSmsrMark(model, a, plotted, layout.X, layout.SpanUnits);
        return model;
    }

    /// <summary>The fitted envelope over the span of the comb and a little beyond (clipped at the floor).</summary>
    private static void AddEnvelope(PlotModel model, ModeLayout layout)
    {
        var a = layout.Analysis;
        if (a.Envelope is not { Fitted: true, CentreK: { } ck, FwhmModes: { } w, PeakRelativeDb: { } peak } || a.Comb is not { } comb) return;
        var env = new LineSeries { Title = "fitted envelope", Color = EnvelopeColour, StrokeThickness = 1.6, LineStyle = LineStyle.Solid };
        var k0 = comb.FirstK - 0.6;
        var k1 = comb.LastK + 0.6;
        const int N = 200;
        for (var i = 0; i <= N; i++)
        {
            var k = k0 + (k1 - k0) * i / N;
            var db = peak - DbPerNeper * 4 * Math.Log(2) * (k - ck) * (k - ck) / (w * w);
            if (db < layout.Floor) continue;
            env.Points.Add(new DataPoint(layout.XOfK(k), db));
        }

        if (env.Points.Count > 1) model.Series.Add(env);
    }

    private static void AddStems(PlotModel model, IEnumerable<ModeLine> lines, Func<ModeLine, double> x, double floor, string title, OxyColor colour, MarkerType marker)
    {
        var list = lines.ToList();
        if (list.Count == 0) return;
        var stems = new StemSeries
        {
            Title = title,
            Color = colour,
            StrokeThickness = 2,
            Base = floor,
            MarkerType = marker,
            MarkerSize = 4.5,
            MarkerFill = colour,
            MarkerStroke = colour,
        };
        foreach (var l in list.OrderBy(x)) stems.Points.Add(new DataPoint(x(l), l.RelativeDb!.Value));
        model.Series.Add(stems);
    }

    /// <summary>A double arrow from the side-mode level (or the detection limit for a bound) up to 0 dB, next to the
    /// strongest mode, with the SMSR written beside it; a dotted level line from the side line to the arrow.</summary>
    private static void AddSmsrMark(PlotModel model, ModeAnalysis a, List<ModeLine> plotted, Func<ModeLine, double> x, double spanUnits)
    {
        var s = a.Smsr;
        if (s.Kind == SmsrKind.Unbounded || s.ValueDb is not { } value) return;
        var main = plotted.FirstOrDefault(l => l.Index == a.MainLineIndex);
        if (main is null) return;
        var xm = x(main);
        var lowDb = -value;
        var offset = spanUnits * 0.035;
        var side = s.SideLineIndex is { } si ? plotted.FirstOrDefault(l => l.Index == si) : null;
        // Put the arrow between the strongest mode and the side line (to the right without one), so the level
        // line from the side line to the arrow does not cross the strongest mode's stem.
        var dir = side is not null && x(side) < xm ? -1 : 1;
        var xa = xm + dir * offset;

        if (side is not null)
        {
            model.Annotations.Add(new LineAnnotation
            {
                Type = LineAnnotationType.Horizontal,
                Y = lowDb,
                MinimumX = Math.Min(x(side), xa),
                MaximumX = Math.Max(x(side), xa),
                Color = SmsrColour,
                StrokeThickness = 1,
                LineStyle = LineStyle.Dot,
            });
        }

        model.Annotations.Add(new LineAnnotation
        {
            Type = LineAnnotationType.Horizontal,
            Y = 0,
            MinimumX = xm,
            MaximumX = xa,
            Color = SmsrColour,
            StrokeThickness = 1,
            LineStyle = LineStyle.Dot,
        });
        // a double arrow: two heads, one at each end
        model.Annotations.Add(Arrow(new DataPoint(xa, lowDb), new DataPoint(xa, 0)));
        model.Annotations.Add(Arrow(new DataPoint(xa, 0), new DataPoint(xa, lowDb)));
        var text = s.Kind == SmsrKind.LowerBound
            ? $"SMSR ≥ {value.ToString("0.#", CultureInfo.InvariantCulture)} dB"
            : "SMSR " + PlotFormat.WithSigma(value, s.SigmaDb) + " dB";
        // A small SMSR leaves no room beside the arrow: the text then goes above it.
        var above = value < 4;
        model.Annotations.Add(new TextAnnotation
        {
            Text = text,
            TextPosition = new DataPoint(xa, above ? 0 : lowDb / 2),
            TextHorizontalAlignment = above ? HorizontalAlignment.Center : dir > 0 ? HorizontalAlignment.Left : HorizontalAlignment.Right,
            TextVerticalAlignment = above ? VerticalAlignment.Bottom : VerticalAlignment.Middle,
            Offset = above ? new ScreenVector(0, -10) : new ScreenVector(dir * 6, 0),
            Stroke = OxyColors.Transparent,
            Background = OxyColor.FromAColor(0xD8, OxyColors.White),
            Padding = new OxyThickness(3, 1, 3, 1),
            TextColor = SmsrColour,
            FontSize = 12,
        });
    }

    private static ArrowAnnotation Arrow(DataPoint from, DataPoint to) => new()
    {
        StartPoint = from,
        EndPoint = to,
        Color = SmsrColour,
        StrokeThickness = 1.4,
        HeadLength = 8,
        HeadWidth = 3,
    };

    private static string Subtitle(ModeAnalysis a)
    {
        var parts = new List<string>();
        var modes = a.Lines.Count(l => l.Role == LineRole.MainComb);
        parts.Add($"{modes} mode{(modes == 1 ? "" : "s")} on the comb");
        if (a.Spacing is { } s)
            parts.Add("spacing " + FormatFrequencyWithSigma(s.SpacingHz, s.SigmaHz));
        else if (a.Folded is { } f)
            parts.Add($"spacing ambiguous (≡ ±{Quantity.FormatFrequency(f.FoldedStepHz)} mod FSR {Quantity.FormatFrequency(f.FsrHz)})");
        parts.Add($"{a.Count.Total} line{(a.Count.Total == 1 ? "" : "s")} within {a.Count.WithinDb.ToString("0.#", CultureInfo.InvariantCulture)} dB");
        if (a.Envelope is { Fitted: true } e)
        {
            parts.Add(e.FwhmHz is { } w
                ? "envelope FWHM " + Quantity.FormatFrequency(w, 3)
                : $"envelope FWHM {e.FwhmModes!.Value.ToString("0.0", CultureInfo.InvariantCulture)} modes");
        }

        var off = a.Lines.Count(l => l.Role == LineRole.OffComb);
        if (off > 0 && !a.OrdersResolved) parts.Add($"{off} off-comb line{(off == 1 ? "" : "s")} not shown");
        return string.Join(" · ", parts);
    }

    private static string FormatFrequencyWithSigma(double hz, double? sigma)
    {
        if (sigma is not { } s || !(s > 0)) return Quantity.FormatFrequency(hz, 6);
        // Digits down to the second significant digit of the sigma.
        var unit = Math.Abs(hz) >= 1e9 ? (1e9, "GHz") : Math.Abs(hz) >= 1e6 ? (1e6, "MHz") : (1e3, "kHz");
        return PlotFormat.WithSigma(hz / unit.Item1, s / unit.Item1) + " " + unit.Item2;
    }
}
