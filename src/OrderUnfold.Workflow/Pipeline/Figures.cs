namespace OrderUnfold.Pipeline;

/// <summary>
/// Draws figures for the workflow. The workflow decides which figures a run gets and with what data; drawing them is
/// the plotting layer's (OrderUnfold.Plotting.FigureWriter), which the command line passes in. Null where a caller
/// wants no figures.
/// </summary>
public interface IFigureWriter
{
    /// <summary>Draws an unfold run's figures (each sweep's fit, the spectrum, the line plots, the axis calibrations)
    /// into <paramref name="directory"/> as PNG, and the same figures as inline SVG for report.html (each figure built once
    /// for both); returns the paths written and the SVGs.</summary>
    UnfoldFigures WriteUnfold(UnfoldRun run, string directory);

    /// <summary>The track figure as inline SVG (nothing is written).</summary>
    SvgFigure DrawTrack(TrackPlotInput input);

    /// <summary>The series figure as inline SVG (nothing is written).</summary>
    SvgFigure DrawSeries(SeriesPlotInput input);

    /// <summary>Draws the lines of a batch over time into <paramref name="path"/>.</summary>
    void WriteTrack(string path, TrackPlotInput input);

    /// <summary>Draws one value per item over time into <paramref name="path"/>.</summary>
    void WriteSeries(string path, SeriesPlotInput input);
}

/// <summary>A figure drawn for a web page: an <c>&lt;svg&gt;</c> element (no XML prolog; its text escaped by the
/// exporter) and what it shows.</summary>
/// <param name="Caption">What the figure shows, and the PNG file that holds the same figure when plots are written.</param>
/// <param name="Svg">The element, ready to be placed inline.</param>
/// <param name="Width">Natural width in CSS pixels (the page shows it no wider, and narrower when the window is).</param>
/// <param name="Topic">Which part of the report shows it.</param>
public sealed record SvgFigure(string Caption, string Svg, int Width, FigureTopic Topic = FigureTopic.Other);

/// <summary>Which part of report.html a figure belongs to.</summary>
public enum FigureTopic
{
    /// <summary>Anything without a part of its own (shown where the page's figures go).</summary>
    Other,

    /// <summary>The spectrum and the lines.</summary>
    Spectrum,

    /// <summary>One sweep's fit with its residuals.</summary>
    Sweep,

    /// <summary>The calibration evidence (axis, finesse, peak shape).</summary>
    Calibration,
}

/// <summary>An unfold's figures as drawn: the PNG files written and the same figures as inline SVG.</summary>
/// <param name="Paths">PNG files written, in the report's order.</param>
/// <param name="Svg">The figures as inline SVG, in the same order (a composed figure gives one per panel).</param>
public sealed record UnfoldFigures(IReadOnlyList<string> Paths, IReadOnlyList<SvgFigure> Svg);

/// <summary>Lines of a time series: one point per line per item.</summary>
/// <param name="Title">Plot title.</param>
/// <param name="Subtitle">What the frequency axis means.</param>
/// <param name="TimeS">Time of each point, s since <paramref name="Origin"/> (or an item index when there is no origin).</param>
/// <param name="FrequencyHz">Frequency of each point, Hz.</param>
/// <param name="IntensityDb">Intensity of each point, dB relative to the item's strongest line (NaN: not drawn).</param>
/// <param name="HopTimesS">Times of mode hops (dashed vertical marks).</param>
/// <param name="Origin">Clock time of t = 0, or null when time is an item index.</param>
public sealed record TrackPlotInput(string Title, string Subtitle, double[] TimeS, double[] FrequencyHz, double[] IntensityDb,
    double[] HopTimesS, DateTimeOffset? Origin);

/// <summary>One value per item over time (e.g. side-mode suppression).</summary>
public sealed record SeriesPlotInput(string Title, string Subtitle, string ValueTitle, double[] TimeS, double[] Values, double[] HopTimesS,
    DateTimeOffset? Origin);
