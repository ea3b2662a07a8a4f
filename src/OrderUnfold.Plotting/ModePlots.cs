using System.Globalization;
using OrderUnfold.Analysis.Modes;
using OrderUnfold.Io;
using OrderUnfold.Units;
using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Legends;
using OxyPlot.Series;

namespace OrderUnfold.Plotting;

/// <summary>
/// The laser-mode picture: every line as a stem on a dB scale relative to the strongest, the fitted gain
/// envelope, the side-mode suppression ratio marked beside the strongest mode, and the detection-limit floor.
/// Rendered like <see cref="Plots"/>: OxyPlot model, SkiaSharp PNG in memory, written atomically.
/// </summary>
public static class ModePlots
{
    /// <summary>Pixel size of the mode image.</summary>
    public static readonly (int Width, int Height) Size = (1200, 650);

    private static readonly OxyColor MainColor = Palette.Blue;
    private static readonly OxyColor SecondColor = OxyColor.FromRgb(0xD0, 0x7A, 0x12);
    private static readonly OxyColor OffColor = OxyColor.FromRgb(0x8C, 0x8C, 0x8C);
    private static readonly OxyColor EnvelopeColor = Palette.Crimson;
    private static readonly OxyColor SmsrColor = OxyColor.FromRgb(0x20, 0x20, 0x20);
    private static readonly OxyColor LimitColor = Palette.MidGrey;

    /// <summary>dB per neper of power: 10 / ln 10.</summary>
    private const double DbPerNeper = 10 / 2.302585092994046;

    /// <summary>Writes the mode plot of <paramref name="analysis"/> to <paramref name="path"/> (PNG, <see cref="Size"/>).</summary>
    public static void Save(string path, ModeAnalysis analysis, string title = "Laser modes")
    {
        ArgumentException.ThrowIfNullOrWhiteSpace(path);
        var model = Build(analysis, title);
        AtomicFile.WriteAllBytes(path, Plots.RenderPng(model, Size.Width, Size.Height));
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
        var mainRead = a.MainLine.ReadFrequencyHz ?? a.MainLine.FrequencyHz;

        var plotted = a.Lines.Where(l => l.RelativeDb is not null && (byFrequency ? l.ReadFrequencyHz is not null : l.Role == LineRole.MainComb && l.K is not null)).ToList();
        var xsHz = byFrequency ? plotted.Select(l => l.ReadFrequencyHz!.Value - mainRead).ToList() : [];
        var scale = FrequencyAxisScale.For(byFrequency ? FrequencyAxisScale.SpanHz(xsHz.Append(0)) : 0);
        double X(ModeLine l) => byFrequency ? scale.FromHertz(l.ReadFrequencyHz!.Value - mainRead) : l.K!.Value;
        double XOfK(double k) => byFrequency && a.Spacing is { } s ? scale.FromHertz(s.OriginHz + k * s.SpacingHz - mainRead) : k;

        // Vertical range: a floor below the weakest line and the detection limit, in whole 10 dB steps.
        double? limitDb = a.DetectionLimit is { } d ? 10 * Math.Log10(d) : null;
        var lowest = plotted.Select(l => l.RelativeDb!.Value).Append(limitDb ?? 0).Append(-10).Min();
        var floor = Math.Floor((lowest - 6) / 10) * 10;
        const double Top = 8;

        var model = Plots.NewModel(title, Subtitle(a));

        var xs = plotted.Select(X).ToList();
        var xMin = xs.Count > 0 ? xs.Min() : -1;
        var xMax = xs.Count > 0 ? xs.Max() : 1;
        if (a.Comb is { } comb)
        {
            xMin = Math.Min(xMin, XOfK(comb.FirstK));
            xMax = Math.Max(xMax, XOfK(comb.LastK));
        }

        var pad = Math.Max((xMax - xMin) * 0.08, byFrequency ? scale.FromHertz(a.Spacing?.SpacingHz ?? 0) * 0.6 : 0.6);
        if (pad <= 0) pad = 1;
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Bottom,
            Title = byFrequency ? scale.Title("frequency relative to the strongest mode") : "mode index k (spacing ambiguous: see modes.json)",
            StringFormat = byFrequency ? scale.TickFormat(scale.HertzPerUnit * (xMax - xMin + 2 * pad)) : "0",
            MajorStep = byFrequency ? double.NaN : Math.Max(1, Math.Ceiling((xMax - xMin + 2 * pad) / 12)),
            Minimum = xMin - pad,
            Maximum = xMax + pad,
        }));
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Left,
            Title = "power relative to the strongest mode (dB)",
            Minimum = floor,
            Maximum = Top,
            MajorStep = (Top - floor) > 60 ? 20 : 10,
            MinorStep = 5,
            StringFormat = "0",
        }));

        var others = plotted.Any(l => l.Role != LineRole.MainComb);
        AddStems(model, plotted.Where(l => l.Role == LineRole.MainComb), X, floor, others ? "mode (main comb)" : "mode", MainColor, MarkerType.Circle);
        AddStems(model, plotted.Where(l => l.Role == LineRole.SecondFamily), X, floor, "second family", SecondColor, MarkerType.Diamond);
        AddStems(model, plotted.Where(l => l.Role == LineRole.OffComb), X, floor, "off-comb line", OffColor, MarkerType.Square);

        if (a.Comb is { MissingK.Count: > 0 } c3)
        {
            var miss = new ScatterSeries
            {
                Title = "missing mode",
                MarkerType = MarkerType.Cross,
                MarkerSize = 5,
                MarkerStroke = MainColor,
                MarkerStrokeThickness = 1.5,
            };
            foreach (var k in c3.MissingK) miss.Points.Add(new ScatterPoint(XOfK(k), floor + 1.5));
            model.Series.Add(miss);
        }

        // Envelope over the span of the comb and a little beyond (clipped by the axis).
        if (a.Envelope is { Fitted: true, CentreK: { } ck, FwhmModes: { } w, PeakRelativeDb: { } peak } && a.Comb is { } c2)
        {
            var env = new LineSeries { Title = "fitted envelope", Color = EnvelopeColor, StrokeThickness = 1.6, LineStyle = LineStyle.Solid };
            var k0 = c2.FirstK - 0.6;
            var k1 = c2.LastK + 0.6;
            const int N = 200;
            for (var i = 0; i <= N; i++)
            {
                var k = k0 + (k1 - k0) * i / N;
                var db = peak - DbPerNeper * 4 * Math.Log(2) * (k - ck) * (k - ck) / (w * w);
                if (db < floor) continue;
                env.Points.Add(new DataPoint(XOfK(k), db));
            }

            if (env.Points.Count > 1) model.Series.Add(env);
        }

        if (limitDb is { } ld)
        {
            model.Series.Add(new LineSeries
            {
                Title = "detection limit",
                Color = LimitColor,
                StrokeThickness = 1.2,
                LineStyle = LineStyle.Dash,
                Points = { new DataPoint(xMin - pad, ld), new DataPoint(xMax + pad, ld) },
            });
        }

        AddSmsrMark(model, a, plotted, X, limitDb, (xMax - xMin + 2 * pad));
        return model;
    }

    private static void AddStems(PlotModel model, IEnumerable<ModeLine> lines, Func<ModeLine, double> x, double floor, string title, OxyColor color, MarkerType marker)
    {
        var list = lines.ToList();
        if (list.Count == 0) return;
        var stems = new StemSeries
        {
            Title = title,
            Color = color,
            StrokeThickness = 2,
            Base = floor,
            MarkerType = marker,
            MarkerSize = 4.5,
            MarkerFill = color,
            MarkerStroke = color,
        };
        foreach (var l in list.OrderBy(x)) stems.Points.Add(new DataPoint(x(l), l.RelativeDb!.Value));
        model.Series.Add(stems);
    }

    /// <summary>A double arrow from the side-mode level (or the detection limit for a bound) up to 0 dB, next to the
    /// strongest mode, with the SMSR written beside it; a dotted level line from the side line to the arrow.</summary>
    private static void AddSmsrMark(PlotModel model, ModeAnalysis a, List<ModeLine> plotted, Func<ModeLine, double> x, double? limitDb, double spanUnits)
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
                Color = SmsrColor,
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
            Color = SmsrColor,
            StrokeThickness = 1,
            LineStyle = LineStyle.Dot,
        });
        model.Annotations.Add(new ArrowAnnotation
        {
            StartPoint = new DataPoint(xa, lowDb),
            EndPoint = new DataPoint(xa, 0),
            Color = SmsrColor,
            StrokeThickness = 1.4,
            HeadLength = 8,
            HeadWidth = 3,
        });
        model.Annotations.Add(new ArrowAnnotation
        {
            StartPoint = new DataPoint(xa, 0),
            EndPoint = new DataPoint(xa, lowDb),
            Color = SmsrColor,
            StrokeThickness = 1.4,
            HeadLength = 8,
            HeadWidth = 3,
        });
        var text = s.Kind == SmsrKind.LowerBound
            ? $"SMSR ≥ {value.ToString("0.#", CultureInfo.InvariantCulture)} dB"
            : "SMSR " + Plots.FormatWithSigma(value, s.SigmaDb) + " dB";
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
            TextColor = SmsrColor,
            FontSize = 12,
        });
    }

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
        return Plots.FormatWithSigma(hz / unit.Item1, s / unit.Item1) + " " + unit.Item2;
    }
}
