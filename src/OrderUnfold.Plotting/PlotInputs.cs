namespace OrderUnfold.Plotting;

/// <summary>One sweep with the model overlaid (top panel) and residuals beneath (bottom panel).
/// The horizontal axis is the calibrated scan frequency shift f(x) in Hz.</summary>
public sealed record SweepPlotInput(
    string Title,
    double[] ScanFrequencyHz,
    double[] Measured,
    double[] Model,
    string InstrumentName,
    double FsrHz);

/// <summary>A line to mark on a spectrum plot.</summary>
public sealed record LineMark(double FrequencyHz, double Intensity, string Label, bool Doubtful = false, double? SigmaHz = null, double? IntensitySigma = null);

/// <summary>The unfolded spectrum on its grid with the lines marked. Frequencies are relative to the
/// anchor unless <see cref="AbsoluteOffsetHz"/> is set (then the axis shows offset + f).</summary>
public sealed record SpectrumPlotInput(
    string Title,
    double[] GridHz,
    double[] Intensity,
    IReadOnlyList<LineMark> Lines,
    double? AbsoluteOffsetHz = null,
    double[]? DetectionLimit = null);

/// <summary>A sweep-axis calibration: the fitted polynomial f(x) with the calibration points, and the residuals.</summary>
public sealed record AxisPlotInput(
    string Title,
    string XLabel,
    double[] PointX,
    double[] PointFrequencyHz,
    double[] CurveX,
    double[] CurveFrequencyHz,
    double[] ResidualHz);

/// <summary>One transmission peak with the fitted Airy profile (top panel) and residuals beneath.
/// <see cref="DetuningHz"/> is the frequency offset from the peak centre in Hz; the plot shows it in MHz.</summary>
public sealed record FinessePlotInput(
    string Title,
    double[] DetuningHz,
    double[] Measured,
    double[] Model,
    double Finesse,
    double? FinesseSigma);
