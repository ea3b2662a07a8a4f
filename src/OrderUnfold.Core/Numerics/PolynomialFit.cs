using MathNet.Numerics.LinearAlgebra;

namespace OrderUnfold.Numerics;

/// <summary>
/// Weighted linear least squares of a low-degree polynomial y = Σ p_d·x^d (MathNet QR), with the
/// covariance policy used throughout the mode analysis: with sigmas, the covariance is (XᵀWX)⁻¹, multiplied
/// by the reduced χ² when that exceeds 1; without sigmas, s²·(XᵀX)⁻¹ with s² = RSS/(n − p), or none when n = p.
/// </summary>
public static class PolynomialFit
{
    public sealed record Result(
        double[] Parameters,
        double[,]? Covariance,
        double[] Residuals,
        double ChiSquared,
        int DegreesOfFreedom,
        double? ReducedChiSquared,
        UncertaintyBasis Basis)
    {
        public double? Sigma(int i) => Covariance is null ? null : Math.Sqrt(Math.Max(0, Covariance[i, i]));

        public double? Cov(int i, int j) => Covariance?[i, j];
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
        var a = Matrix<double>.Build.Dense(n, p);
        var b = Vector<double>.Build.Dense(n);
        for (var i = 0; i < n; i++)
        {
            var w = sigma is null ? 1.0 : 1.0 / sigma[i];
            var t = 1.0;
            for (var d = 0; d < p; d++)
            {
                a[i, d] = t * w;
                t *= x[i] - xc;
            }

            b[i] = y[i] * w;
        }

        var beta = a.QR().Solve(b);
        var ata = a.TransposeThisAndMultiply(a).Inverse();

        var residuals = new double[n];
        var chi2 = 0.0;
        for (var i = 0; i < n; i++)
        {
            var t = 1.0;
            var f = 0.0;
            for (var d = 0; d < p; d++)
            {
                f += beta[d] * t;
                t *= x[i] - xc;
            }

            residuals[i] = y[i] - f;
            var r = sigma is null ? residuals[i] : residuals[i] / sigma[i];
            chi2 += r * r;
        }

        var dof = n - p;
        double? reduced = dof > 0 ? chi2 / dof : null;
        Matrix<double>? cov;
        UncertaintyBasis basis;
        if (sigma is not null)
        {
            var scale = reduced is > 1 ? reduced.Value : 1.0;
            cov = ata * scale;
            basis = reduced is > 1 ? UncertaintyBasis.LineSigmasScaled : UncertaintyBasis.LineSigmas;
        }
        else if (dof > 0)
        {
            cov = ata * (chi2 / dof);
            basis = UncertaintyBasis.Scatter;
        }
        else
        {
            cov = null;
            basis = UncertaintyBasis.None;
        }

        // Back from centred t = x − xc to x: the map p_raw = T·p_centred is linear.
        var tMat = Matrix<double>.Build.Dense(p, p);
        for (var d = 0; d < p; d++)
        {
            for (var e = d; e < p; e++)
            {
                // (x − xc)^e contributes C(e, d)·(−xc)^(e−d) to x^d.
                tMat[d, e] = Binomial(e, d) * Math.Pow(-xc, e - d);
            }
        }

        var raw = tMat * beta;
        double[,]? covRaw = null;
        if (cov is not null)
        {
            var c = tMat * cov * tMat.Transpose();
            covRaw = c.ToArray();
        }

        return new Result(raw.ToArray(), covRaw, residuals, chi2, dof, sigma is null ? null : reduced, basis);
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
        Array.Sort(known);
        var median = known.Length % 2 == 1 ? known[known.Length / 2] : 0.5 * (known[known.Length / 2 - 1] + known[known.Length / 2]);
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
