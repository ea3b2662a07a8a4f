using System.Globalization;
using System.Text;
using OrderUnfold.Analysis;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Units;
using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Legends;
using OxyPlot.Series;
using SkiaSharp;

namespace OrderUnfold.Plotting;

/// <summary>
/// Plots of a refined line list: the spectrum on a dB scale with error bars, the order verdicts and the detection-limit
/// curve (<see cref="SpectrumDbFile"/>), and one zoom panel per group of nearby lines (<see cref="LineGroupsFile"/>).
/// Rendered like <see cref="Plots"/>: OxyPlot models to PNG with the SkiaSharp exporter, written atomically.
/// </summary>
public static class LinePlots
{
    /// <summary>File name of the dB spectrum.</summary>
    public const string SpectrumDbFile = "spectrum-db.png";

    /// <summary>File name of the zoom panels.</summary>
    public const string LineGroupsFile = "line-groups.png";

    /// <summary>Lines closer than this to their neighbour form one group (one zoom panel).</summary>
    public const double GroupGapHz = 500e6;

    /// <summary>Pixel size of the dB spectrum.</summary>
    public static readonly (int Width, int Height) SpectrumDbSize = (1200, 650);

    /// <summary>Pixel size of one zoom panel.</summary>
    public static readonly (int Width, int Height) PanelSize = (520, 360);

    /// <summary>Most zoom panels drawn (the strongest groups); more would not be readable.</summary>
    public const int MaxPanels = 12;

    private static readonly OxyColor SecureColor = Palette.Crimson;
    private static readonly OxyColor DoubtfulColor = Palette.Ochre;
    private static readonly OxyColor UnknownColor = Palette.Charcoal;
    private static readonly OxyColor GridSpectrumColor = Palette.Blue;
    private static readonly OxyColor LimitColor = OxyColor.FromRgb(0x30, 0x30, 0x30);

    /// <summary>
    /// Writes <see cref="SpectrumDbFile"/> and <see cref="LineGroupsFile"/> (the latter only when there is at least one
    /// line) into <paramref name="directory"/> and returns the paths written.
    /// </summary>
    /// <param name="directory">Output folder (created if needed).</param>
    /// <param name="result">An unfold result, refined or not; frequencies relative to the anchor.</param>
    /// <param name="linewidthHz">Instrument linewidth used to size the zoom windows (the widest instrument's).</param>
    /// <param name="statement">Optional sentence for the subtitle (e.g. the unambiguous range at this noise).</param>
    public static IReadOnlyList<string> Write(string directory, UnfoldResult result, double linewidthHz, string? statement = null)
    {
        ArgumentNullException.ThrowIfNull(result);
        Directory.CreateDirectory(directory);
        var written = new List<string>();
        var db = Path.Combine(directory, SpectrumDbFile);
        AtomicFile.WriteAllBytes(db, Plots.RenderPng(BuildSpectrumDb(result, statement), SpectrumDbSize.Width, SpectrumDbSize.Height));
        written.Add(db);
        if (result.Lines.Count > 0)
        {
            var groups = Path.Combine(directory, LineGroupsFile);
            AtomicFile.WriteAllBytes(groups, RenderGroups(result, linewidthHz));
            written.Add(groups);
        }

        return written;
    }

    // ---------------------------------------------------------------- dB spectrum

    /// <summary>10·log10 of a relative intensity, or NaN for non-positive or non-finite values.</summary>
    internal static double Db(double v) => v > 0 && double.IsFinite(v) ? 10 * Math.Log10(v) : double.NaN;

    internal static PlotModel BuildSpectrumDb(UnfoldResult r, string? statement)
    {
        var grid = r.Grid;
        var lines = r.Lines;
        var span = FrequencyAxisScale.SpanHz(new[] { grid.StartHz, grid.EndHz }.Concat(lines.Select(l => l.FrequencyHz)));
        var scale = FrequencyAxisScale.For(span);
        var limit = r.DetectionLimit;

        // vertical range: from below the lowest line or limit to just above 0 dB
        var lows = lines.Select(l => Db(l.Intensity - Err(l))).Concat(lines.Select(l => Db(l.Intensity)))
            .Concat(limit is null ? [] : limit.Select(Db)).Where(double.IsFinite).ToList();
        // room below the lowest line or limit for the labels, which stand upright along the stems
        var floor = lows.Count > 0 ? Math.Floor((lows.Min() - 9) / 10) * 10 : -40;
        floor = Math.Max(floor, -120);

        var doubtfulCount = lines.Count(l => l.Verdict == OrderVerdict.Doubtful);
        var subtitle = lines.Count == 0
            ? "no line found"
            : $"{lines.Count} line{(lines.Count == 1 ? "" : "s")}" + (doubtfulCount > 0 ? $", {doubtfulCount} with a doubtful order" : "") +
              " · error bars ±1σ of the intensity";
        if (limit is not null) subtitle += " · dashed: smallest intensity that would have been detected (SNR ≥ threshold)";
        if (!string.IsNullOrWhiteSpace(statement)) subtitle += "\n" + Wrap(statement, 150);

        var model = Plots.NewModel("Line spectrum (dB relative to the strongest line)", subtitle);
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Bottom,
            Title = scale.Title("frequency relative to anchor"),
            StringFormat = scale.TickFormat(span),
            Minimum = scale.FromHertz(grid.StartHz),
            Maximum = scale.FromHertz(grid.EndHz),
            MinimumPadding = 0.02,
            MaximumPadding = 0.02,
        }, axisLine: false));
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Left,
            Title = "intensity relative to strongest line (dB)",
            Minimum = floor,
            Maximum = 5,
            MajorStep = floor < -60 ? 20 : 10,
        }, axisLine: false));

        if (limit is not null)
        {
            var curve = new LineSeries
            {
                Title = "detection limit",
                Color = LimitColor,
                StrokeThickness = 1.3,
                LineStyle = LineStyle.Dash,
            };
            for (var j = 0; j < grid.Count; j++)
            {
                var v = Db(limit[j]);
                curve.Points.Add(double.IsFinite(v) ? new DataPoint(scale.FromHertz(grid[j]), v) : DataPoint.Undefined);
            }

            model.Series.Add(curve);
        }

        foreach (var verdict in new[] { OrderVerdict.Secure, OrderVerdict.Unknown, OrderVerdict.Doubtful })
        {
            var mine = lines.Where(l => l.Verdict == verdict && double.IsFinite(Db(l.Intensity))).ToList();
            if (mine.Count == 0) continue;
            var (color, title, marker, fill) = Style(verdict, r.Refined);
            var stems = new StemSeries { Color = color, StrokeThickness = 1.4, Base = floor, RenderInLegend = false };
            if (verdict == OrderVerdict.Doubtful) stems.LineStyle = LineStyle.Dot;
            var marks = LineMarks(title, marker, fill, color, 5.5, 1.8);
            foreach (var l in mine)
            {
                var x = scale.FromHertz(l.FrequencyHz);
                var y = Db(l.Intensity);
                stems.Points.Add(new DataPoint(x, y));
                // a ±σ interval in dB is asymmetric; the bar shows the larger half so that it is never understated
                var lo = Db(l.Intensity - Err(l));
                var hi = Db(l.Intensity + Err(l));
                var ey = double.IsFinite(lo) ? Math.Max(y - lo, hi - y) : double.IsFinite(hi) ? hi - y : 0;
                marks.Points.Add(new ScatterErrorPoint(x, y, 0, double.IsFinite(ey) ? ey : 0));
            }

            model.Series.Add(stems);
            model.Series.Add(marks);
        }

        AddLabels(model, lines, scale, floor);
        return model;
    }

    /// <summary>Breaks <paramref name="text"/> into lines of at most <paramref name="width"/> characters at spaces.</summary>
    internal static string Wrap(string text, int width)
    {
        var lines = new List<string>();
        var current = new StringBuilder();
        // a unit stays on the line of its number
        var words = new List<string>();
        foreach (var w in text.Split(' '))
        {
            if (words.Count > 0 && w.TrimEnd(':', ',', ';', '.', ')') is "Hz" or "kHz" or "MHz" or "GHz" or "THz" or "dB") words[^1] += " " + w;
            else words.Add(w);
        }

        foreach (var word in words)
        {
            if (current.Length > 0 && current.Length + 1 + word.Length > width)
            {
                lines.Add(current.ToString());
                current.Clear();
            }

            if (current.Length > 0) current.Append(' ');
            current.Append(word);
        }

        if (current.Length > 0) lines.Add(current.ToString());
        return string.Join("\n", lines);
    }

    private static double Err(UnfoldedLine l) => double.IsFinite(l.IntensityError) ? l.IntensityError : 0;

    /// <summary>Markers with ±σ bars for refined lines, in one verdict's colour.</summary>
    private static ScatterErrorSeries LineMarks(string title, MarkerType marker, OxyColor fill, OxyColor color, double size, double stroke) => new()
    {
        Title = title,
        MarkerType = marker,
        MarkerSize = size,
        MarkerFill = fill,
        MarkerStroke = color,
        MarkerStrokeThickness = stroke,
        ErrorBarColor = color,
        ErrorBarStrokeThickness = 1.3,
        ErrorBarStopWidth = 4,
    };

    private static (OxyColor Color, string Title, MarkerType Marker, OxyColor Fill) Style(OrderVerdict v, bool refined) => v switch
    {
        OrderVerdict.Secure => (SecureColor, "line, order secure", MarkerType.Circle, SecureColor),
        OrderVerdict.Doubtful => (DoubtfulColor, "line, order doubtful (hollow)", MarkerType.Diamond, OxyColors.White),
        _ => (UnknownColor, refined ? "line, order not determined" : "line (unrefined)", MarkerType.Square, UnknownColor),
    };

    /// <summary>Frequency labels written upright beside each stem, just above the floor of the plot, where they cannot
    /// collide with each other (their width is one text line) nor with the markers.</summary>
    private static void AddLabels(PlotModel model, IReadOnlyList<UnfoldedLine> lines, FrequencyAxisScale scale, double floor)
    {
        foreach (var l in lines)
        {
            if (!double.IsFinite(Db(l.Intensity))) continue;
            model.Annotations.Add(new TextAnnotation
            {
                Text = Quantity.FormatFrequency(l.FrequencyHz, 6),
                TextPosition = new DataPoint(scale.FromHertz(l.FrequencyHz), floor),
                TextRotation = -90,
                TextHorizontalAlignment = HorizontalAlignment.Left,
                TextVerticalAlignment = VerticalAlignment.Bottom,
                Offset = new ScreenVector(-2, -4),
                Stroke = OxyColors.Transparent,
                Background = OxyColor.FromAColor(0xD0, OxyColors.White),
                FontSize = 10.5,
                TextColor = l.Verdict == OrderVerdict.Doubtful ? DoubtfulColor : OxyColor.FromRgb(0x20, 0x20, 0x20),
            });
        }
    }

    // ---------------------------------------------------------------- zoom panels

    /// <summary>Groups of lines (indices into <paramref name="lines"/>, sorted by frequency) whose neighbours are closer than <see cref="GroupGapHz"/>.</summary>
    internal static List<List<UnfoldedLine>> Groups(IReadOnlyList<UnfoldedLine> lines)
    {
        var groups = new List<List<UnfoldedLine>>();
        foreach (var l in lines.Where(l => double.IsFinite(l.FrequencyHz)).OrderBy(l => l.FrequencyHz))
        {
            if (groups.Count > 0 && l.FrequencyHz - groups[^1][^1].FrequencyHz < GroupGapHz) groups[^1].Add(l);
            else groups.Add([l]);
        }

        return groups;
    }

    internal static PlotModel BuildGroupPanel(UnfoldResult r, List<UnfoldedLine> group, int index, double linewidthHz)
    {
        var origin = group[0].FrequencyHz;
        var margin = Math.Max(3 * linewidthHz, 0.08 * (group[^1].FrequencyHz - origin));
        var lo = origin - margin;
        var hi = group[^1].FrequencyHz + margin;
        double X(double hz) => (hz - origin) / 1e6;

        var title = group.Count == 1
            ? $"{index}: line at {Quantity.FormatFrequency(origin, 6)}"
            : $"{index}: {group.Count} lines from {Quantity.FormatFrequency(origin, 6)}";
        var model = Plots.NewModel(title, null);
        model.TitleFontSize = 13;
        model.DefaultFontSize = 11;
        model.IsLegendVisible = false; // the legend is in the header of the composed image
        model.Padding = new OxyThickness(6, 4, 12, 4);
        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Bottom,
            Title = $"offset from {Quantity.FormatFrequency(origin, 6)} (MHz)",
            Minimum = X(lo),
            Maximum = X(hi),
            MaximumPadding = 0,
            MinimumPadding = 0,
        }, axisLine: false));

        var stems = new StemSeries { Title = "grid spectrum", Color = GridSpectrumColor, StrokeThickness = 1.6, Base = 0 };
        var yMax = 0.0;
        var g = r.Grid;
        var first = Math.Max(0, (int)Math.Floor((lo - g.StartHz) / g.StepHz));
        var last = Math.Min(g.Count - 1, (int)Math.Ceiling((hi - g.StartHz) / g.StepHz));
        for (var j = first; j <= last; j++)
        {
            var v = r.Spectrum[j];
            if (!(v > 0) || !double.IsFinite(v)) continue;
            stems.Points.Add(new DataPoint(X(g[j]), v));
            yMax = Math.Max(yMax, v);
        }

        if (stems.Points.Count > 0) model.Series.Add(stems);

        foreach (var verdict in new[] { OrderVerdict.Secure, OrderVerdict.Unknown, OrderVerdict.Doubtful })
        {
            var mine = group.Where(l => l.Verdict == verdict).ToList();
            if (mine.Count == 0) continue;
            var (color, name, marker, fill) = Style(verdict, r.Refined);
            var s = LineMarks(r.Refined ? name.Replace("line,", "refined line ±σ,", StringComparison.Ordinal) : name, marker, fill, color, 5, 1.6);
            foreach (var l in mine)
            {
                var ex = l.FrequencySigmaHz is double sx && double.IsFinite(sx) ? sx / 1e6 : 0;
                s.Points.Add(new ScatterErrorPoint(X(l.FrequencyHz), l.Intensity, ex, Err(l)));
                yMax = Math.Max(yMax, l.Intensity + Err(l));
            }

            model.Series.Add(s);
        }

        // each marker gets its number; the subtitle lists number: offset ± σ (σ is usually far below the panel's
        // resolution, so it is written out). Numbers of neighbouring markers are staggered in height.
        var entries = new List<string>();
        for (var k = 0; k < group.Count; k++)
        {
            var l = group[k];
            var sigma = l.FrequencySigmaHz is double sx && double.IsFinite(sx) && sx > 0 ? " ± " + Quantity.FormatFrequency(sx, 2) : "";
            var flag = l.Verdict == OrderVerdict.Doubtful ? " (doubtful)" : "";
            entries.Add($"{k + 1}: {FormatOffsetMhz(l.FrequencyHz - origin)} MHz{sigma}{flag}");
            model.Annotations.Add(new TextAnnotation
            {
                Text = (k + 1).ToString(CultureInfo.InvariantCulture),
                TextPosition = new DataPoint(X(l.FrequencyHz), l.Intensity + Err(l)),
                Offset = new ScreenVector(0, -7 - 13 * (k % 2)),
                TextVerticalAlignment = VerticalAlignment.Bottom,
                TextHorizontalAlignment = HorizontalAlignment.Center,
                Stroke = OxyColors.Transparent,
                FontSize = 10.5,
                FontWeight = FontWeights.Bold,
                TextColor = l.Verdict == OrderVerdict.Doubtful ? DoubtfulColor : OxyColor.FromRgb(0x20, 0x20, 0x20),
            });
        }

        const int shownEntries = 6;
        var list = string.Join(" · ", entries.Take(shownEntries)) + (entries.Count > shownEntries ? $" · … {entries.Count - shownEntries} more" : "");
        model.Subtitle = Wrap(list, 80);
        model.SubtitleFontSize = 10.5;

        model.Axes.Add(Palette.Gridded(new LinearAxis
        {
            Position = AxisPosition.Left,
            Title = "intensity (rel. to strongest)",
            Minimum = 0,
            Maximum = (yMax > 0 ? yMax : 1) * 1.35,
        }, axisLine: false));
        return model;
    }

    private static string FormatOffsetMhz(double hz)
    {
        var mhz = hz / 1e6;
        var text = Math.Abs(mhz) < 0.0005 ? "0" : mhz.ToString(Math.Abs(mhz) >= 100 ? "F2" : "F3", CultureInfo.InvariantCulture);
        return mhz > 0.0005 ? "+" + text : text;
    }

    /// <summary>Renders up to <see cref="MaxPanels"/> group panels (strongest groups first, shown in frequency order) on a
    /// grid of at most three columns under a header line, composed with SkiaSharp.</summary>
    internal static byte[] RenderGroups(UnfoldResult r, double linewidthHz)
    {
        var groups = Groups(r.Lines);
        var shown = groups.OrderByDescending(g => g.Max(l => l.Intensity)).Take(MaxPanels).OrderBy(g => g[0].FrequencyHz).ToList();
        var cols = Math.Min(3, shown.Count);
        var rows = (shown.Count + cols - 1) / cols;
        var sub = groups.Count > shown.Count
            ? $"{groups.Count} groups (lines within {Quantity.FormatFrequency(GroupGapHz)} of each other); the {shown.Count} strongest are shown"
            : $"{groups.Count} group{(groups.Count == 1 ? "" : "s")} (lines within {Quantity.FormatFrequency(GroupGapHz)} of each other)";
        sub += " · blue stems: grid (NNLS) spectrum · markers: refined lines with ±1σ bars, numbered as listed under each title · hollow diamonds: order doubtful";
        var (pw, ph) = PanelSize;
        var width = cols * pw;
        using var titlePaint = new SKPaint { IsAntialias = true, Color = new SKColor(0x20, 0x20, 0x20), TextSize = 18, Typeface = SKTypeface.FromFamilyName(Plots.FontFamily, SKFontStyle.Bold) };
        using var subPaint = new SKPaint { IsAntialias = true, Color = new SKColor(0x50, 0x50, 0x50), TextSize = 13, Typeface = SKTypeface.FromFamilyName(Plots.FontFamily) };
        var subLines = WrapToWidth(sub, subPaint, width - 24);
        var header = 34 + 18 * subLines.Count;
        var info = new SKImageInfo(width, header + rows * ph);
        using var surface = SKSurface.Create(info);
        var canvas = surface.Canvas;
        canvas.Clear(SKColors.White);
        canvas.DrawText("Line groups: grid spectrum and refined lines (±1σ)", 12, 24, titlePaint);
        for (var i = 0; i < subLines.Count; i++) canvas.DrawText(subLines[i], 12, 44 + 18 * i, subPaint);
        for (var i = 0; i < shown.Count; i++)
        {
            var panel = BuildGroupPanel(r, shown[i], i + 1, linewidthHz);
            using var bitmap = SKBitmap.Decode(Plots.RenderPng(panel, pw, ph));
            canvas.DrawBitmap(bitmap, i % cols * pw, header + i / cols * ph);
        }

        using var image = surface.Snapshot();
        using var data = image.Encode(SKEncodedImageFormat.Png, 100);
        return data.ToArray();
    }

    private static List<string> WrapToWidth(string text, SKPaint paint, float width)
    {
        var lines = new List<string>();
        var current = "";
        foreach (var word in text.Split(' '))
        {
            var next = current.Length == 0 ? word : current + " " + word;
            if (current.Length > 0 && paint.MeasureText(next) > width)
            {
                lines.Add(current);
                current = word;
            }
            else
            {
                current = next;
            }
        }

        if (current.Length > 0) lines.Add(current);
        return lines;
    }
}
