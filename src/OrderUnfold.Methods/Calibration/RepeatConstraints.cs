namespace OrderUnfold.Calibration;

/// <summary>A peak of the sweep with its width and position uncertainty in scan units.</summary>
internal sealed record DetectedPeak(Peak Peak, double WidthX, double SigmaX)
{
    public double X => Peak.X;
    public double Height => Peak.Height;

    /// <summary>The peak with its width in x and its position uncertainty for a sweep of noise σ <paramref name="noise"/>.</summary>
    public static DetectedPeak From(Sweep sweep, Peak peak, double noise)
    {
        var width = WidthInX(sweep, peak);
        return new DetectedPeak(peak, width, PositionSigmaX(width, peak, noise));
    }

    private static double WidthInX(Sweep sweep, Peak p)
    {
        var i = (int)Math.Clamp(Math.Round(p.Position), 1, sweep.Count - 2);
        return Math.Max(1e-300, p.WidthSamples * Math.Abs(sweep.X[i + 1] - sweep.X[i - 1]) / 2);
    }

    /// <summary>Position uncertainty of a peak in x: about FWHM·σ/(h·√samples-per-FWHM), floored at 0.5 % of the FWHM.</summary>
    private static double PositionSigmaX(double widthX, Peak p, double noise)
    {
        var rel = 0.6 * noise / Math.Max(p.Height, 1e-300) / Math.Sqrt(Math.Max(1, p.WidthSamples));
        return widthX * Math.Max(rel, 0.005);
    }
}

/// <summary>
/// One constraint on the axis: the feature at <see cref="FirstX"/> repeats at <see cref="RepeatX"/>, so
/// f(RepeatX) − f(FirstX) = <see cref="Delta"/>. Indices are the peaks' (negative for windows of the correlation start
/// and for the intervals of a calibration sweep). <see cref="Used"/> and <see cref="Residual"/> follow the latest fit.
/// </summary>
internal sealed class RepeatConstraint(int firstIndex, int repeatIndex, double firstX, double repeatX, double firstHeight, double repeatHeight,
    double delta, double sigma, string origin)
{
    public int FirstIndex { get; } = firstIndex;
    public int RepeatIndex { get; } = repeatIndex;
    public double FirstX { get; } = firstX;
    public double RepeatX { get; } = repeatX;
    public double FirstHeight { get; } = firstHeight;
    public double RepeatHeight { get; } = repeatHeight;
    public double Delta { get; } = delta;
    public double Sigma { get; set; } = sigma;
    public string Origin { get; } = origin;
    public double Residual { get; set; }
    public bool Used { get; set; } = true;
}

/// <summary>How the height ratio of true repeats runs along the sweep: ln(h_b/h_a) ≈ Intercept + Slope·x within Tolerance
/// (a drifting laser power tilts it; noise spreads it).</summary>
internal sealed record HeightModel(double Intercept, double Slope, double Tolerance)
{
    public bool Accepts(double x, double ratio) => Math.Abs(Math.Log(ratio) - (Intercept + Slope * x)) <= Tolerance;

    /// <summary>The straight line (MathNet <c>Fit.Line</c>) through the log height ratios of the used repeat pairs, with 5 robust
    /// standard deviations (1.4826 × the median absolute deviation) as the tolerance; null with fewer than four pairs.</summary>
    public static HeightModel? From(List<RepeatConstraint> pairs)
    {
        var used = pairs.Where(c => c.Used && c.FirstIndex >= 0).ToList();
        if (used.Count < 4) return null;
        var xs = used.Select(c => c.FirstX).ToArray();
        var ys = used.Select(c => Math.Log(c.RepeatHeight / c.FirstHeight)).ToArray();
        var (intercept, slope) = xs.Distinct().Count() > 1 ? MathNet.Numerics.Fit.Line(xs, ys) : (ys.Average(), 0.0);
        var sigma = 1.4826 * Medians.Upper(xs.Zip(ys, (x, y) => Math.Abs(y - intercept - slope * x)));
        return new HeightModel(intercept, slope, Math.Max(5 * sigma, 0.03));
    }
}
