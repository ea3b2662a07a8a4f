namespace OrderUnfold.Calibration;

/// <summary>Policy for using a sweep beyond the outermost calibration points.</summary>
public sealed record AxisExtentOptions
{
    /// <summary>Furthest a sample may lie beyond the outermost calibration point, in local periods (FSRs of scan):
    /// a bounded margin, whatever the uncertainty estimate says.</summary>
    public double MaxMarginPeriods { get; init; } = 1.0;

    /// <summary>A sample is dropped when the estimated uncertainty of its axis position exceeds this fraction of the
    /// instrument linewidth.</summary>
    public double MaxSigmaLinewidths { get; init; } = 0.25;

    /// <summary>Slope change over the calibrated range assumed for a straight-line (degree-1) axis, whose fit cannot
    /// show its own curvature: 25 %, the upper end of what scanning piezos show (common practice; see design notes).</summary>
    public double AssumedSlopeChange { get; init; } = 0.25;
}

/// <summary>Which samples of a sweep an axis covers, and how uncertain the axis is where it is extrapolated.</summary>
/// <param name="Keep">Indices of the samples to use, ascending.</param>
/// <param name="ExtrapolationSigmaHz">For each kept sample, the model part of the axis uncertainty (0 inside the
/// calibrated range), Hz.</param>
/// <param name="Extrapolated">Kept samples outside the calibrated range.</param>
/// <param name="Dropped">Samples dropped (too far out, or too uncertain).</param>
/// <param name="MaxSigmaHz">Largest model uncertainty among the kept samples, Hz.</param>
public sealed record AxisExtentResult(int[] Keep, double[] ExtrapolationSigmaHz, int Extrapolated, int Dropped, double MaxSigmaHz);

/// <summary>
/// Extends a calibrated axis beyond its outermost calibration points by a bounded margin. Inside the calibrated range
/// the axis polynomial is trusted (its statistical uncertainty is propagated by the line refinement). Beyond it, the
/// part of the piezo's non-linearity the fit could not see grows with the distance: its size is estimated as the
/// bend of the fit's highest-order term beyond the edge (how much that term departs from its tangent at the edge;
/// for a straight-line fit, from an assumed slope change over the range), added in quadrature to the statistical
/// uncertainty of the polynomial at that point. Samples are dropped only where that estimate exceeds a stated
/// fraction of a linewidth, or beyond the hard margin; the kept samples carry their model uncertainty into the line
/// sigmas.
/// </summary>
public static class AxisExtent
{
    /// <summary>Decides the usable samples of a sweep with scan coordinates <paramref name="x"/>.</summary>
    public static AxisExtentResult Evaluate(AxisCalibration calibration, IReadOnlyList<double> x, double linewidthHz, double fsrHz, AxisExtentOptions? options = null)
    {
        options ??= new AxisExtentOptions();
        var axis = calibration.Axis;
        var keep = new List<int>(x.Count);
        var sig = new List<double>(x.Count);
        var extrapolated = 0;
        var max = 0.0;
        var lo = axis.XMin;
        var hi = axis.XMax;
        var periodLo = fsrHz / Math.Max(Math.Abs(axis.Derivative(lo)), 1e-300);
        var periodHi = fsrHz / Math.Max(Math.Abs(axis.Derivative(hi)), 1e-300);
        var testLo = LeaveOutTest(calibration, lowSide: true);
        var testHi = LeaveOutTest(calibration, lowSide: false);
        for (var i = 0; i < x.Count; i++)
        {
            var xi = x[i];
            if (xi >= lo && xi <= hi)
            {
                keep.Add(i);
                sig.Add(0);
                continue;
            }

            var below = xi < lo;
            var distance = below ? lo - xi : xi - hi;
            if (distance > options.MaxMarginPeriods * (below ? periodLo : periodHi)) continue;
            var test = below ? testLo : testHi;
            var model = test is { } tt
                ? tt.ErrorHz * Math.Pow(distance / tt.DistanceX, axis.Degree + 1)
                : ModelSigma(axis, xi, below ? lo : hi, options.AssumedSlopeChange);
            var stat = StatisticalSigma(axis, calibration.ShapeCovariance, xi, below ? lo : hi);
            var s = Math.Sqrt(model * model + stat * stat);
            if (!(s <= options.MaxSigmaLinewidths * linewidthHz)) continue;
            keep.Add(i);
            sig.Add(s);
            extrapolated++;
            max = Math.Max(max, s);
        }

        return new AxisExtentResult(keep.ToArray(), sig.ToArray(), extrapolated, x.Count - keep.Count, max);
    }

    /// <summary>
    /// An extrapolation test on the calibration points themselves: the axis is refitted (same degree) without the
    /// outermost point of one side, and the refit's error at that point, one calibration interval beyond its own
    /// range, is measured against the full fit. The error of an extrapolated polynomial grows as the (d+1)-th power of
    /// the distance (the Taylor remainder), so it scales to other distances. Null when the points are too few (a
    /// degree-d refit needs d + 1 points) or the axis came from repeats of the source rather than from points.
    /// </summary>
    public static (double ErrorHz, double DistanceX)? LeaveOutTest(AxisCalibration calibration, bool lowSide)
    {
        var d = calibration.Axis.Degree;
        var n = calibration.PointCount;
        if (calibration.FromRepeats || n < d + 2) return null;
        var order = Enumerable.Range(0, n).OrderBy(i => calibration.PointX[i]).ToArray();
        var outer = lowSide ? order[0] : order[^1];
        var rest = lowSide ? order[1..] : order[..^1];
        var full = AxisPolynomial.Fit(calibration.PointX, calibration.PointHz, d);
        var refit = AxisPolynomial.Fit(rest.Select(i => calibration.PointX[i]).ToArray(), rest.Select(i => calibration.PointHz[i]).ToArray(), d);
        var xo = calibration.PointX[outer];
        var edge = lowSide ? refit.XMin : refit.XMax;
        var distance = Math.Abs(xo - edge);
        if (!(distance > 0)) return null;
        // the refit's error one interval out, with the scale of the axis the sweep uses (a wavelength transfer rescales it)
        var scale = Math.Abs(calibration.Axis.Derivative(xo) / full.Derivative(xo));
        var error = Math.Abs(refit.Evaluate(xo) - full.Evaluate(xo)) * (double.IsFinite(scale) ? scale : 1);
        return (error, distance);
    }

    /// <summary>Bend of the highest-order term beyond the edge: |c_d|·|tᵈ − t_eᵈ − d·t_eᵈ⁻¹(t − t_e)| in the polynomial's
    /// normalised coordinate; for degree 1, an assumed quadratic term c₂ = ν·c₁/4 (a slope change ν over t ∈ [−1, 1]).</summary>
    public static double ModelSigma(AxisPolynomial axis, double x, double edge, double assumedSlopeChange)
    {
        var t = (x - axis.Center) / axis.HalfRange;
        var te = (edge - axis.Center) / axis.HalfRange;
        var c = axis.Coefficients;
        var d = axis.Degree;
        if (d <= 1)
        {
            var c1 = d == 1 ? Math.Abs(c[1]) : 0;
            return assumedSlopeChange * c1 / 4 * (t - te) * (t - te);
        }

        return Math.Abs(c[d]) * Math.Abs(Math.Pow(t, d) - Math.Pow(te, d) - d * Math.Pow(te, d - 1) * (t - te));
    }

    /// <summary>Statistical uncertainty of f(x) − f(edge) from the covariance of the shape coefficients (0 when unknown).</summary>
    public static double StatisticalSigma(AxisPolynomial axis, double[]? shapeCovariance, double x, double edge)
    {
        var d = axis.Degree;
        if (shapeCovariance is null || shapeCovariance.Length != d * d) return 0;
        var t = (x - axis.Center) / axis.HalfRange;
        var te = (edge - axis.Center) / axis.HalfRange;
        var b = new double[d];
        for (var j = 0; j < d; j++) b[j] = Math.Pow(t, j + 1) - Math.Pow(te, j + 1);
        var v = 0.0;
        for (var j = 0; j < d; j++)
        for (var k = 0; k < d; k++)
            v += b[j] * shapeCovariance[j * d + k] * b[k];
        return Math.Sqrt(Math.Max(0, v));
    }
}
