using System.Text;
using OrderUnfold.Analysis;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Units;
using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Series;

namespace OrderUnfold.Plotting;

/// <summary>
/// Plots of a refined line list: the spectrum on a dB scale with error bars, the order verdicts and the detection-limit
/// curve (<see cref="SpectrumDbFile"/>), and one zoom panel per group of nearby lines (<see cref="LineGroupsFile"/>).
/// Built and rendered with <see cref="Figure"/> (PNG in memory, written atomically); the zoom panels are <see cref="LineGroupPanels"/>.
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

    private static readonly OxyColor SecureColour = Palette.Crimson;
    internal static readonly OxyColor DoubtfulColour = Palette.Ochre;
    private static readonly OxyColor UnknownColour = Palette.Charcoal;
    internal static readonly OxyColor GridSpectrumColour = Palette.Blue;
    private static readonly OxyColor LimitColour = OxyColor.FromRgb(0x30, 0x30, 0x30);

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
        AtomicFile.WriteAllBytes(db, Figure.RenderPng(BuildSpectrumDb(result, statement), SpectrumDbSize.Width, SpectrumDbSize.Height));
        written.Add(db);
        if (result.Lines.Count > 0)
        {
            var groups = Path.Combine(directory, LineGroupsFile);
            AtomicFile.WriteAllBytes(groups, LineGroupPanels.Render(result, linewidthHz));
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
        var floor = DbFloor(lines, limit);

        var model = Figure.NewModel("Line spectrum (dB relative to the strongest line)", DbSubtitle(lines, limit is not null, statement));
        var xAxis = Figure.Axis(AxisPosition.Bottom, scale.Title("frequency relative to anchor"),
            scale.FromHertz(grid.StartHz), scale.FromHertz(grid.EndHz), scale.TickFormat(span), axisLine: false);
        xAxis.MinimumPadding = 0.02;
        xAxis.MaximumPadding = 0.02;
        model.Axes.Add(xAxis);
        var yAxis = Figure.Axis(AxisPosition.Left, "intensity relative to strongest line (dB)", floor, 5, axisLine: false);
        yAxis.MajorStep = floor < -60 ? 20 : 10;
        model.Axes.Add(yAxis);

        if (limit is not null)
        {
            var curve = new LineSeries
            {
                Title = "detection limit",
                Color = LimitColour,
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

        foreach (var verdict in VerdictOrder)
            AddVerdictStems(model, lines.Where(l => l.Verdict == verdict && double.IsFinite(Db(l.Intensity))).ToList(), verdict, r.Refined, scale, floor);
        AddLabels(model, lines, scale, floor);
        return model;
    }

    /// <summary>The verdicts in drawing order (doubtful lines last, on top).</summary>
    internal static readonly OrderVerdict[] VerdictOrder = [OrderVerdict.Secure, OrderVerdict.Unknown, OrderVerdict.Doubtful];

    /// <summary>Bottom of the dB axis: 10 dB steps below the lowest line, error bar or limit, with room for the labels,
    /// which stand upright along the stems; at least −120 dB.</summary>
    private static double DbFloor(IReadOnlyList<UnfoldedLine> lines, double[]? limit)
    {
        var lows = lines.Select(l => Db(l.Intensity - Err(l))).Concat(lines.Select(l => Db(l.Intensity)))
            .Concat(limit is null ? [] : limit.Select(Db)).Where(double.IsFinite).ToList();
        var floor = lows.Count > 0 ? Math.Floor((lows.Min() - 9) / 10) * 10 : -40;
        return Math.Max(floor, -120);
    }

    private static string DbSubtitle(IReadOnlyList<UnfoldedLine> lines, bool withLimit, string? statement)
    {
        var doubtfulCount = lines.Count(l => l.Verdict == OrderVerdict.Doubtful);
        var subtitle = lines.Count == 0
            ? "no line found"
            : PlotFormat.Count(lines.Count, "line") + (doubtfulCount > 0 ? $", {doubtfulCount} with a doubtful order" : "") +
              " · error bars ±1σ of the intensity";
        if (withLimit) subtitle += " · dashed: smallest intensity that would have been detected (SNR ≥ threshold)";
        if (!string.IsNullOrWhiteSpace(statement)) subtitle += "\n" + Wrap(statement, 150);
        return subtitle;
    }

    /// <summary>The lines of one verdict as stems from the floor with markers and ±σ bars (in dB).</summary>
    private static void AddVerdictStems(PlotModel model, List<UnfoldedLine> mine, OrderVerdict verdict, bool refined, FrequencyAxisScale scale, double floor)
    {
        if (mine.Count == 0) return;
        var (colour, title, marker, fill) = Style(verdict, refined);
        var stems = new StemSeries { Color = colour, StrokeThickness = 1.4, Base = floor, RenderInLegend = false };
        if (verdict == OrderVerdict.Doubtful) stems.LineStyle = LineStyle.Dot;
        var marks = LineMarks(title, marker, fill, colour, 5.5, 1.8);
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

    internal static double Err(UnfoldedLine l) => double.IsFinite(l.IntensityError) ? l.IntensityError : 0;

    /// <summary>Markers with ±σ bars for refined lines, in one verdict's colour.</summary>
    internal static ScatterErrorSeries LineMarks(string title, MarkerType marker, OxyColor fill, OxyColor colour, double size, double stroke) => new()
    {
        Title = title,
        MarkerType = marker,
        MarkerSize = size,
        MarkerFill = fill,
        MarkerStroke = colour,
        MarkerStrokeThickness = stroke,
        ErrorBarColor = colour,
        ErrorBarStrokeThickness = 1.3,
        ErrorBarStopWidth = 4,
    };

    internal static (OxyColor Colour, string Title, MarkerType Marker, OxyColor Fill) Style(OrderVerdict v, bool refined) => v switch
    {
        OrderVerdict.Secure => (SecureColour, "line, order secure", MarkerType.Circle, SecureColour),
        OrderVerdict.Doubtful => (DoubtfulColour, "line, order doubtful (hollow)", MarkerType.Diamond, OxyColors.White),
        _ => (UnknownColour, refined ? "line, order not determined" : "line (unrefined)", MarkerType.Square, UnknownColour),
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
                TextColor = l.Verdict == OrderVerdict.Doubtful ? DoubtfulColour : OxyColor.FromRgb(0x20, 0x20, 0x20),
            });
        }
    }
}
