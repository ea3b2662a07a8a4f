using MathNet.Numerics.LinearAlgebra;

namespace OrderUnfold.Numerics;

/// <summary>
/// Weighted linear least squares of a low-degree polynomial y = Σ p_d·x^d (MathNet QR), with the
/// covariance policy used throughout the mode analysis: with sigmas, the covariance is (XᵀWX)⁻¹, multiplied
/// by the reduced χ² when that exceeds 1; without sigmas, s²·(XᵀX)⁻¹ with s² = RSS/(n − p), or none when n = p.
/// </summary>
public static class PolynomialFit
{
    /// <summary>A polynomial fit: coefficients, their covariance (null when none can be given), residuals, χ² with its
    /// degrees of freedom and reduced value, and where the uncertainties came from.</summary>
    /// <param name="Parameters">Coefficients c₀…c_d.</param>
    /// <param name="Covariance">Covariance of the coefficients, or null.</param>
    /// <param name="Residuals">Data minus fit at each point.</param>
    /// <param name="ChiSquared">Weighted sum of squared residuals (plain sum without sigmas).</param>
    /// <param name="DegreesOfFreedom">Points minus coefficients.</param>
    /// <param name="ReducedChiSquared">χ² per degree of freedom, or null without any.</param>
    /// <param name="Basis">Where the uncertainties came from.</param>
    public sealed record Result(
        double[] Parameters,
        double[,]? Covariance,
        double[] Residuals,
        double ChiSquared,
        int DegreesOfFreedom,
        double? ReducedChiSquared,
        UncertaintyBasis Basis)
    {
        /// <summary>Standard uncertainty of coefficient <paramref name="i"/>, or null.</summary>
        public double? Sigma(int i) => Covariance is null ? null : Math.Sqrt(Math.Max(0, Covariance[i, i]));

        /// <summary>Covariance of coefficients <paramref name="i"/> and <paramref name="j"/>, or null.</summary>
        public double? Cov(int i, int j) => Covariance?[i, j];
    }

    /// <summary>
    /// The weighted Vandermonde design in an abscissa t: row i is wᵢ·(1, tᵢ, …, tᵢᵈ) (wᵢ = 1 when
    /// <paramref name="rowWeights"/> is null). The one place where the project's polynomial least squares are set up.
    /// </summary>
    public static Matrix<double> Design(IReadOnlyList<double> t, IReadOnlyList<double>? rowWeights, int degree)
    {
        var a = Matrix<double>.Build.Dense(t.Count, degree + 1);
        for (var i = 0; i < t.Count; i++)
        {
            var w = rowWeights is null ? 1.0 : rowWeights[i];
            var power = 1.0;
            for (var d = 0; d <= degree; d++)
            {
                a[i, d] = w * power;
                power *= t[i];
            }
        }

        return a;
    }

    /// <summary>Coefficients c₀…c_d of Σ c_d·t^d fitted to y by least squares with row weights wᵢ (minimising
    /// Σ wᵢ²(yᵢ − Σ c_d tᵢ^d)²), by MathNet QR on <see cref="Design"/>; also returns the design.</summary>
    public static (Matrix<double> Design, Vector<double> Coefficients) Solve(IReadOnlyList<double> t, IReadOnlyList<double> y, IReadOnlyList<double>? rowWeights, int degree)
    {
        var a = Design(t, rowWeights, degree);
        var b = Vector<double>.Build.Dense(t.Count);
        for (var i = 0; i < t.Count; i++) b[i] = (rowWeights is null ? 1.0 : rowWeights[i]) * y[i];
        return (a, a.QR().Solve(b));
    }

    /// <summary>Fits; <paramref name="sigma"/> null means unweighted. Needs at least degree + 1 distinct x.</summary>
    public static Result Fit(IReadOnlyList<double> x, IReadOnlyList<double> y, IReadOnlyList<double>? sigma, int degree)
    {
        var n = x.Count;
        var p = degree + 1;
        if (y.Count != n || (sigma is not null && sigma.Count != n)) throw new ArgumentException("x, y and sigma differ in length");
        if (x.Distinct().Count() < p) throw new ArgumentException($"a degree-{degree} fit needs {p} distinct x values but got {x.Distinct().Count()}");

        // Centre x for conditioning; parameters are transformed back afterwards.
        var xc = x.Average();
        var t = x.Select(v => v - xc).ToArray();
        var (a, beta) = Solve(t, y, sigma?.Select(v => 1.0 / v).ToArray(), degree);
        var ata = a.TransposeThisAndMultiply(a).Inverse();
        var residuals = new double[n];
        var chi2 = 0.0;
        for (var i = 0; i < n; i++)
        {
            var power = 1.0;
            var f = 0.0;
            for (var d = 0; d < p; d++)
            {
                f += beta[d] * power;
                power *= t[i];
            }

            residuals[i] = y[i] - f;
            var r = sigma is null ? residuals[i] : residuals[i] / sigma[i];
            chi2 += r * r;
        }

        var dof = n - p;
        double? reduced = dof > 0 ? chi2 / dof : null;
        var (cov, basis) = CovariancePolicy(ata, sigma is not null, chi2, dof, reduced);
        var (raw, covRaw) = FromCentred(beta, cov, xc);
        return new Result(raw, covRaw, residuals, chi2, dof, sigma is null ? null : reduced, basis);
    }

    /// <summary>With sigmas, (XᵀWX)⁻¹ multiplied by the reduced χ² when that exceeds 1; without, s²·(XᵀX)⁻¹ with
    /// s² = RSS/(n − p), or none when n = p.</summary>
    private static (Matrix<double>? Covariance, UncertaintyBasis Basis) CovariancePolicy(Matrix<double> ata, bool weighted, double chi2, int dof, double? reduced)
    {
        if (weighted)
        {
            var scale = reduced is > 1 ? reduced.Value : 1.0;
            return (ata * scale, reduced is > 1 ? UncertaintyBasis.LineSigmasScaled : UncertaintyBasis.LineSigmas);
        }

        return dof > 0 ? (ata * (chi2 / dof), UncertaintyBasis.Scatter) : (null, UncertaintyBasis.None);
    }

    /// <summary>Back from centred t = x − xc to x: the map p_raw = T·p_centred is linear, (x − xc)^e contributing
    /// C(e, d)·(−xc)^(e−d) to x^d.</summary>
    private static (double[] Parameters, double[,]? Covariance) FromCentred(Vector<double> beta, Matrix<double>? cov, double xc)
    {
        var p = beta.Count;
        var tMat = Matrix<double>.Build.Dense(p, p);
        for (var d = 0; d < p; d++)
            for (var e = d; e < p; e++)
                tMat[d, e] = Binomial(e, d) * Math.Pow(-xc, e - d);
        var raw = tMat * beta;
        return (raw.ToArray(), cov is null ? null : (tMat * cov * tMat.Transpose()).ToArray());
    }

    private static double Binomial(int n, int k)
    {
        var r = 1.0;
        for (var i = 1; i <= k; i++) r = r * (n - k + i) / i;
        return r;
    }

    /// <summary>
    /// Sigmas for a weighted fit: all given and positive → as given; some → the missing ones get the median
    /// of the given ones (<paramref name="filled"/> true); none → null (unweighted).
    /// </summary>
    public static double[]? Weights(IReadOnlyList<double?> sigmas, out bool filled)
    {
        filled = false;
        var known = sigmas.Where(s => s is > 0 && double.IsFinite(s.Value)).Select(s => s!.Value).ToArray();
        if (known.Length == 0) return null;
        if (known.Length == sigmas.Count) return known;
        var median = Medians.OfFinite(known);
        filled = true;
        return sigmas.Select(s => s is > 0 && double.IsFinite(s.Value) ? s.Value : median).ToArray();
    }
}

/// <summary>Where an uncertainty came from.</summary>
public enum UncertaintyBasis
{
    /// <summary>No uncertainty could be given (exact fit without line sigmas).</summary>
    None,

    /// <summary>Propagated from the line sigmas; the fit's reduced χ² was at most 1 (or undefined).</summary>
    LineSigmas,

    /// <summary>Propagated from the line sigmas and multiplied by √(reduced χ²), which was above 1.</summary>
    LineSigmasScaled,

    /// <summary>Estimated from the scatter of the residuals (no line sigmas given).</summary>
    Scatter,
}
