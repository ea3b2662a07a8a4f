using MathNet.Numerics.LinearAlgebra;

namespace OrderUnfold.Numerics;

/// <summary>
/// Sweep axis: frequency shift f(x) in Hz as a polynomial in the normalised scan coordinate
/// t = (x − Center) / HalfRange, so that the coefficients stay well conditioned whatever x's unit.
/// </summary>
public sealed record AxisPolynomial
{
    /// <summary>An axis f(t) = Σ cᵢ tⁱ with t = (x − <paramref name="center"/>) / <paramref name="halfRange"/> (positive), fitted over [<paramref name="xMin"/>, <paramref name="xMax"/>].</summary>
    public AxisPolynomial(double[] coefficients, double center, double halfRange, double xMin, double xMax)
    {
        if (coefficients.Length == 0) throw new ArgumentException("an axis polynomial needs at least one coefficient");
        if (!(halfRange > 0)) throw new ArgumentException($"half range must be positive but got {halfRange}");
        Coefficients = coefficients;
        Center = center;
        HalfRange = halfRange;
        XMin = xMin;
        XMax = xMax;
    }

    /// <summary>Coefficients c₀…c_d of f(t) = Σ cᵢ tⁱ, in Hz.</summary>
    public double[] Coefficients { get; }

    /// <summary>Centre of the normalisation, in units of x.</summary>
    public double Center { get; }
    /// <summary>Half-range of the normalisation, in units of x.</summary>
    public double HalfRange { get; }

    /// <summary>The x range the polynomial was fitted over (extrapolation beyond it is not trusted).</summary>
    public double XMin { get; }
    /// <summary>Upper end of the fitted x range.</summary>
    public double XMax { get; }

    /// <summary>Polynomial degree d.</summary>
    public int Degree => Coefficients.Length - 1;

    /// <summary>f(x) in Hz.</summary>
    public double Evaluate(double x)
    {
        var t = (x - Center) / HalfRange;
        var r = 0.0;
        for (var i = Coefficients.Length - 1; i >= 0; i--) r = r * t + Coefficients[i];
        return r;
    }

    /// <summary>df/dx in Hz per unit of x.</summary>
    public double Derivative(double x)
    {
        var t = (x - Center) / HalfRange;
        var r = 0.0;
        for (var i = Coefficients.Length - 1; i >= 1; i--) r = r * t + i * Coefficients[i];
        return r / HalfRange;
    }

    /// <summary>f(x) at each of <paramref name="x"/>, Hz.</summary>
    public double[] Evaluate(IReadOnlyList<double> x)
    {
        var r = new double[x.Count];
        for (var i = 0; i < r.Length; i++) r[i] = Evaluate(x[i]);
        return r;
    }

    /// <summary>True when f is strictly monotone (same sign of f′ everywhere) on [a, b], checked on a dense grid.</summary>
    public bool IsMonotone(double a, double b, int points = 2001)
    {
        var sign = 0;
        for (var i = 0; i < points; i++)
        {
            var d = Derivative(a + (b - a) * i / (points - 1));
            var s = Math.Sign(d);
            if (s == 0) return false;
            if (sign == 0) sign = s;
            else if (s != sign) return false;
        }

        return true;
    }

    /// <summary>The same axis scaled by a factor (e.g. the wavelength ratio of a calibration laser) and shifted.</summary>
    public AxisPolynomial Scaled(double factor, double shiftHz = 0)
    {
        var c = Coefficients.Select(v => v * factor).ToArray();
        c[0] += shiftHz;
        return new AxisPolynomial(c, Center, HalfRange, XMin, XMax);
    }

    /// <summary>
    /// Covariance of the shape coefficients c₁…c_d (row-major d × d, Hz²) of this polynomial as an unweighted
    /// least-squares fit to the points (x, f): s²(AᵀA)⁻¹ restricted to c₁…c_d, with A the normalised Vandermonde
    /// matrix and s² = Σ residual² / (n − d − 1). The constant c₀ is left out: a common shift of the whole axis is
    /// absorbed by the sweep's frequency origin. Null without a degree of freedom or when AᵀA is singular.
    /// </summary>
    public double[]? ShapeCovariance(IReadOnlyList<double> x, IReadOnlyList<double> f)
    {
        var n = x.Count;
        var p = Coefficients.Length;
        if (n != f.Count || n <= p || Degree < 1) return null;
        var a = PolynomialFit.Design(x.Select(v => (v - Center) / HalfRange).ToArray(), null, Degree);
        var rss = 0.0;
        for (var i = 0; i < n; i++)
        {
            var r = f[i] - Evaluate(x[i]);
            rss += r * r;
        }

        var normal = a.TransposeThisAndMultiply(a);
        var det = normal.Determinant();
        if (det == 0 || !double.IsFinite(det)) return null;
        var cov = normal.Inverse() * (rss / (n - p));
        var d = Degree;
        var result = new double[d * d];
        for (var i = 0; i < d; i++)
        for (var j = 0; j < d; j++)
            result[i * d + j] = cov[i + 1, j + 1];
        return result.All(double.IsFinite) ? result : null;
    }

    /// <summary>
    /// RMS standard uncertainty of the axis shape over the calibrated range, Hz, from a shape covariance (row-major d × d
    /// of c₁…c_d, see <see cref="ShapeCovariance"/>): √(gᵀCg) averaged (in quadrature) over 64 points t ∈ [−1, 1], with
    /// g = (tᵐ − mean tᵐ) so that a common shift, which the sweep origin absorbs, does not count.
    /// </summary>
    public static double ShapeSigmaRms(IReadOnlyList<double> shapeCovariance, int degree)
    {
        const int m = 64;
        var vs = new double[m, degree];
        var mean = new double[degree];
        for (var j = 0; j < m; j++)
        {
            var t = -1 + 2.0 * j / (m - 1);
            var p = t;
            for (var i = 0; i < degree; i++)
            {
                vs[j, i] = p;
                mean[i] += p / m;
                p *= t;
            }
        }

        var total = 0.0;
        var v = new double[degree];
        for (var j = 0; j < m; j++)
        {
            for (var i = 0; i < degree; i++) v[i] = vs[j, i] - mean[i];
            for (var a = 0; a < degree; a++)
            for (var b = 0; b < degree; b++)
                total += v[a] * shapeCovariance[a * degree + b] * v[b];
        }

        return Math.Sqrt(Math.Max(0, total / m));
    }

    /// <summary>
    /// Weighted least-squares fit of a degree-d polynomial to points (x, f), by QR on the normalised Vandermonde matrix.
    /// </summary>
    public static AxisPolynomial Fit(IReadOnlyList<double> x, IReadOnlyList<double> f, int degree, IReadOnlyList<double>? weights = null)
    {
        if (x.Count != f.Count) throw new ArgumentException("x and f differ in length");
        if (degree < 0) throw new ArgumentOutOfRangeException(nameof(degree));
        if (x.Count < degree + 1) throw new ArgumentException($"a degree-{degree} axis needs at least {degree + 1} points but got {x.Count}");
        var xmin = x.Min();
        var xmax = x.Max();
        var center = 0.5 * (xmin + xmax);
        var half = 0.5 * (xmax - xmin);
        if (!(half > 0)) half = 1;
        var t = x.Select(v => (v - center) / half).ToArray();
        var c = PolynomialFit.Solve(t, f, weights?.Select(Math.Sqrt).ToArray(), degree).Coefficients.ToArray();
        return new AxisPolynomial(c, center, half, xmin, xmax);
    }
}
