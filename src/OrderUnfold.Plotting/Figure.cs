using OrderUnfold.Io;
using OxyPlot;
using OxyPlot.Axes;
using OxyPlot.Legends;

namespace OrderUnfold.Plotting;

/// <summary>
/// What every figure shares: the model in the project's style (font, background, legend above the plot), the axes
/// in that style, and the export (SkiaSharp PNG rendered in memory, then written atomically with
/// <see cref="AtomicFile"/>, so a reader never sees a half-written image).
/// </summary>
internal static class Figure
{
    /// <summary>A model in the project's style: <see cref="Plots.FontFamily"/>, white background, legend in one row above
    /// the plot, where it never covers data.</summary>
    public static PlotModel NewModel(string title, string? subtitle)
    {
        var model = new PlotModel
        {
            Title = title,
            Subtitle = subtitle,
            DefaultFont = Plots.FontFamily,
            DefaultFontSize = 12,
            TitleFontSize = 16,
            SubtitleFontSize = 12,
            Background = OxyColors.White,
            PlotAreaBorderThickness = new OxyThickness(0),
            Padding = new OxyThickness(8, 8, 16, 8),
        };
        model.Legends.Add(new Legend
        {
            LegendPlacement = LegendPlacement.Outside,
            LegendPosition = LegendPosition.TopRight,
            LegendOrientation = LegendOrientation.Horizontal,
            LegendBorderThickness = 0,
            LegendFontSize = 12,
            LegendSymbolLength = 24,
            LegendItemSpacing = 16,
        });
        return model;
    }

    /// <summary>A linear axis in the style of <see cref="Palette.Gridded"/>; a NaN limit or a null format leaves
    /// OxyPlot's automatic choice.</summary>
    public static LinearAxis Axis(AxisPosition position, string title, double minimum = double.NaN, double maximum = double.NaN,
        string? format = null, bool axisLine = true) =>
        Palette.Gridded(new LinearAxis
        {
            Position = position,
            Title = title,
            Minimum = minimum,
            Maximum = maximum,
            StringFormat = format,
        }, axisLine);

    /// <summary>A left axis that takes the part <paramref name="start"/>…<paramref name="end"/> of the plot height, for
    /// figures with stacked panels over one horizontal axis; series and annotations find it by <paramref name="key"/>.</summary>
    public static LinearAxis PanelAxis(string key, string title, double start, double end, double padding = 0.01,
        double minimum = double.NaN, double maximum = double.NaN) =>
        Palette.Gridded(new LinearAxis
        {
            Key = key,
            Position = AxisPosition.Left,
            Title = title,
            StartPosition = start,
            EndPosition = end,
            MaximumPadding = padding,
            MinimumPadding = padding,
            Minimum = minimum,
            Maximum = maximum,
        });

    /// <summary>Renders a model to PNG bytes with OxyPlot's SkiaSharp exporter.</summary>
    public static byte[] RenderPng(PlotModel model, int width, int height)
    {
        using var stream = new MemoryStream();
        var exporter = new OxyPlot.SkiaSharp.PngExporter { Width = width, Height = height };
        exporter.Export(model, stream);
        return stream.ToArray();
    }

    /// <summary>Renders a model to an SVG element for inline use in an HTML page: OxyPlot's SVG exporter writes the text as
    /// text (selectable, searchable), measured by the same SkiaSharp text measurer as the PNG so that labels are placed as
    /// in the PNG. The XML prolog is dropped and the fixed size becomes a view box (<see cref="InlineSvg"/>).</summary>
    public static string RenderSvg(PlotModel model, int width, int height)
    {
        using var measurer = new OxyPlot.SkiaSharp.SkiaRenderContext { RenderTarget = OxyPlot.SkiaSharp.RenderTarget.VectorGraphic };
        var exporter = new OxyPlot.SvgExporter { Width = width, Height = height, IsDocument = false, TextMeasurer = measurer };
        return InlineSvg.FromDocument(exporter.ExportToString(model), width, height, model.Title);
    }

    /// <summary>Renders a model to PNG and writes it atomically (its folder is created if needed).</summary>
    public static void Save(string path, PlotModel model, (int Width, int Height) size)
    {
        ArgumentException.ThrowIfNullOrWhiteSpace(path);
        AtomicFile.WriteAllBytes(path, RenderPng(model, size.Width, size.Height));
    }
}
