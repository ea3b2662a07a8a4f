using System.Globalization;
using OrderUnfold.Analysis;
using OrderUnfold.Inversion;
using OrderUnfold.Units;
using OxyPlot;
using OxyPlot.Annotations;
using OxyPlot.Axes;
using OxyPlot.Series;
using SkiaSharp;

namespace OrderUnfold.Plotting;

/// <summary>
/// The zoom panels of <see cref="LinePlots.LineGroupsFile"/>: one panel per group of nearby lines with the grid spectrum
/// and the refined lines, numbered, composed on a grid under a header with SkiaSharp.
/// </summary>
internal static class LineGroupPanels
{
    /// <summary>Groups of lines (indices into <paramref name="lines"/>, sorted by frequency) whose neighbours are closer than <see cref="LinePlots.GroupGapHz"/>.</summary>
    internal static List<List<UnfoldedLine>> Groups(IReadOnlyList<UnfoldedLine> lines)
    {
        var groups = new List<List<UnfoldedLine>>();
        foreach (var l in lines.Where(l => double.IsFinite(l.FrequencyHz)).OrderBy(l => l.FrequencyHz))
        {
            if (groups.Count > 0 && l.FrequencyHz - groups[^1][^1].FrequencyHz < LinePlots.GroupGapHz) groups[^1].Add(l);
            else groups.Add([l]);
        }

        return groups;
    }

    internal static PlotModel BuildPanel(UnfoldResult r, List<UnfoldedLine> group, int index, double linewidthHz)
    {
        var origin = group[0].FrequencyHz;
        var margin = Math.Max(3 * linewidthHz, 0.08 * (group[^1].FrequencyHz - origin));
        var lo = origin - margin;
        var hi = group[^1].FrequencyHz + margin;
        double X(double hz) => (hz - origin) / 1e6;

        var title = group.Count == 1
            ? $"{index}: line at {Quantity.FormatFrequency(origin, 6)}"
            : $"{index}: {group.Count} lines from {Quantity.FormatFrequency(origin, 6)}";
        var model = Figure.NewModel(title, null);
        model.TitleFontSize = 13;
        model.DefaultFontSize = 11;
        model.IsLegendVisible = false; // the legend is in the header of the composed image
        model.Padding = new OxyThickness(6, 4, 12, 4);
        var xAxis = Figure.Axis(AxisPosition.Bottom, $"offset from {Quantity.FormatFrequency(origin, 6)} (MHz)", X(lo), X(hi), axisLine: false);
        xAxis.MaximumPadding = 0;
        xAxis.MinimumPadding = 0;
        model.Axes.Add(xAxis);

        var yMax = AddGridStems(model, r, lo, hi, X);
        foreach (var verdict in LinePlots.VerdictOrder)
        {
            var mine = group.Where(l => l.Verdict == verdict).ToList();
            if (mine.Count == 0) continue;
            var (colour, name, marker, fill) = LinePlots.Style(verdict, r.Refined);
            var s = LinePlots.LineMarks(r.Refined ? name.Replace("line,", "refined line ±σ,", StringComparison.Ordinal) : name, marker, fill, colour, 5, 1.6);
            foreach (var l in mine)
            {
                var ex = l.FrequencySigmaHz is double sx && double.IsFinite(sx) ? sx / 1e6 : 0;
                s.Points.Add(new ScatterErrorPoint(X(l.FrequencyHz), l.Intensity, ex, LinePlots.Err(l)));
                yMax = Math.Max(yMax, l.Intensity + LinePlots.Err(l));
            }

            model.Series.Add(s);
        }

        model.Subtitle = NumberLines(model, group, origin, X);
        model.SubtitleFontSize = 10.5;
        var yAxis = Figure.Axis(AxisPosition.Left, "intensity (rel. to strongest)", 0, (yMax > 0 ? yMax : 1) * 1.35, axisLine: false);
        model.Axes.Add(yAxis);
        return model;
    }

    /// <summary>The grid spectrum within <paramref name="lo"/>…<paramref name="hi"/> as stems (positive bins only);
    /// returns the tallest.</summary>
    private static double AddGridStems(PlotModel model, UnfoldResult r, double lo, double hi, Func<double, double> x)
    {
        var stems = new StemSeries { Title = "grid spectrum", Color = LinePlots.GridSpectrumColour, StrokeThickness = 1.6, Base = 0 };
        var yMax = 0.0;
        var g = r.Grid;
        var first = Math.Max(0, (int)Math.Floor((lo - g.StartHz) / g.StepHz));
        var last = Math.Min(g.Count - 1, (int)Math.Ceiling((hi - g.StartHz) / g.StepHz));
        for (var j = first; j <= last; j++)
        {
            var v = r.Spectrum[j];
            if (!(v > 0) || !double.IsFinite(v)) continue;
            stems.Points.Add(new DataPoint(x(g[j]), v));
            yMax = Math.Max(yMax, v);
        }

        if (stems.Points.Count > 0) model.Series.Add(stems);
        return yMax;
    }

    /// <summary>
    /// Each marker gets its number; returns the subtitle listing number: offset ± σ (σ is usually far below the panel's
    /// resolution, so it is written out). Numbers of neighbouring markers are staggered in height.
    /// </summary>
    private static string NumberLines(PlotModel model, List<UnfoldedLine> group, double origin, Func<double, double> x)
    {
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
                TextPosition = new DataPoint(x(l.FrequencyHz), l.Intensity + LinePlots.Err(l)),
                Offset = new ScreenVector(0, -7 - 13 * (k % 2)),
                TextVerticalAlignment = VerticalAlignment.Bottom,
                TextHorizontalAlignment = HorizontalAlignment.Center,
                Stroke = OxyColors.Transparent,
                FontSize = 10.5,
                FontWeight = FontWeights.Bold,
                TextColor = l.Verdict == OrderVerdict.Doubtful ? LinePlots.DoubtfulColour : OxyColor.FromRgb(0x20, 0x20, 0x20),
            });
        }

        const int shownEntries = 6;
        var list = string.Join(" · ", entries.Take(shownEntries)) + (entries.Count > shownEntries ? $" · … {entries.Count - shownEntries} more" : "");
        return LinePlots.Wrap(list, 80);
    }

    private static string FormatOffsetMhz(double hz)
    {
        var mhz = hz / 1e6;
        var text = Math.Abs(mhz) < 0.0005 ? "0" : mhz.ToString(Math.Abs(mhz) >= 100 ? "F2" : "F3", CultureInfo.InvariantCulture);
        return mhz > 0.0005 ? "+" + text : text;
    }

    /// <summary>The groups drawn: the <see cref="LinePlots.MaxPanels"/> strongest, in frequency order.</summary>
    private static List<List<UnfoldedLine>> Shown(List<List<UnfoldedLine>> groups) =>
        groups.OrderByDescending(g => g.Max(l => l.Intensity)).Take(LinePlots.MaxPanels).OrderBy(g => g[0].FrequencyHz).ToList();

    /// <summary>The panels of <see cref="Render"/> as separate models (for report.html, where the page lays them out).</summary>
    public static IReadOnlyList<PlotModel> Panels(UnfoldResult r, double linewidthHz)
    {
        var shown = Shown(Groups(r.Lines));
        return shown.Select((g, i) =>
        {
            var panel = BuildPanel(r, g, i + 1, linewidthHz);
            panel.IsLegendVisible = true; // no composed header here: each panel carries its legend
            return panel;
        }).ToList();
    }

    /// <summary>Renders up to <see cref="LinePlots.MaxPanels"/> group panels (strongest groups first, shown in frequency order) on a
    /// grid of at most three columns under a header line, composed with SkiaSharp.</summary>
    public static byte[] Render(UnfoldResult r, double linewidthHz)
    {
        var groups = Groups(r.Lines);
        var shown = Shown(groups);
        var cols = Math.Min(3, shown.Count);
        var rows = (shown.Count + cols - 1) / cols;
        var sub = groups.Count > shown.Count
            ? $"{groups.Count} groups (lines within {Quantity.FormatFrequency(LinePlots.GroupGapHz)} of each other); the {shown.Count} strongest are shown"
            : $"{groups.Count} group{(groups.Count == 1 ? "" : "s")} (lines within {Quantity.FormatFrequency(LinePlots.GroupGapHz)} of each other)";
        sub += " · blue stems: grid (NNLS) spectrum · markers: refined lines with ±1σ bars, numbered as listed under each title · hollow diamonds: order doubtful";
        var (pw, ph) = LinePlots.PanelSize;
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
            var panel = BuildPanel(r, shown[i], i + 1, linewidthHz);
            using var bitmap = SKBitmap.Decode(Figure.RenderPng(panel, pw, ph));
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
