namespace OrderUnfold.Pipeline;

/// <summary>
/// Draws figures for the workflow. The workflow decides which figures a run gets and with what data; drawing them is
/// the plotting layer's (OrderUnfold.Plotting.FigureWriter), which the command line passes in. Null where a caller
/// wants no figures.
/// </summary>
public interface IFigureWriter
{
    /// <summary>Draws an unfold run's figures (each sweep's fit, the spectrum, the line plots, the axis calibrations)
    /// into <paramref name="directory"/>; returns the paths written.</summary>
    IReadOnlyList<string> WriteUnfold(UnfoldRun run, string directory);

    /// <summary>Draws the lines of a batch over time into <paramref name="path"/>.</summary>
    void WriteTrack(string path, TrackPlotInput input);

    /// <summary>Draws one value per item over time into <paramref name="path"/>.</summary>
    void WriteSeries(string path, SeriesPlotInput input);
}

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
