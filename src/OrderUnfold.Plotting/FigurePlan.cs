using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using OxyPlot;

namespace OrderUnfold.Plotting;

/// <summary>
/// One figure a command draws, before it is drawn: its PNG file name, what it shows and how to build its model. The same
/// plan gives the PNG written beside the outputs (<see cref="Save"/>) and the inline SVG of report.html
/// (<see cref="Svg"/>), so the two never differ. A figure composed of panels (the line groups) gives one SVG per panel.
/// </summary>
internal sealed record FigurePlan(string FileName, string Caption, FigureTopic Topic, (int Width, int Height) Size, Func<PlotModel>? Model,
    Func<byte[]>? ComposedPng = null, Func<IReadOnlyList<PlotModel>>? Panels = null, (int Width, int Height)? PanelSize = null)
{
    private PlotModel? _model;

    /// <summary>The model, built on first use and kept, so the PNG and the SVG of one plan come from one build.</summary>
    private PlotModel Built => _model ??= Model!();

    /// <summary>Writes the PNG into <paramref name="directory"/> atomically; returns its path.</summary>
    public string Save(string directory)
    {
        var path = Path.Combine(directory, FileName);
        if (ComposedPng is not null) AtomicFile.WriteAllBytes(path, ComposedPng());
        else Figure.Save(path, Built, Size);
        return path;
    }

    /// <summary>The figure as inline SVG: one element, or one per panel of a composed figure.</summary>
    public IEnumerable<SvgFigure> Svg()
    {
        var caption = $"{Caption} ({FileName})";
        if (Panels is not null)
        {
            var (w, h) = PanelSize ?? Size;
            var panels = Panels();
            for (var i = 0; i < panels.Count; i++)
                yield return new SvgFigure($"{caption}, panel {i + 1} of {panels.Count}", Figure.RenderSvg(panels[i], w, h), w, Topic);
            yield break;
        }

        yield return new SvgFigure(caption, Figure.RenderSvg(Built, Size.Width, Size.Height), Size.Width, Topic);
    }
}
