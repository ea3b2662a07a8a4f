namespace OrderUnfold.Plotting;

/// <summary>Renders OxyPlot models to PNG files (written atomically).</summary>
public static class Plots
{
    public static void SaveSweepFit(string path, SweepPlotInput input) => throw new NotImplementedException();

    public static void SaveSpectrum(string path, SpectrumPlotInput input) => throw new NotImplementedException();

    public static void SaveAxisCalibration(string path, AxisPlotInput input) => throw new NotImplementedException();
}
