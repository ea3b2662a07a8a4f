using MathNet.Numerics.LinearAlgebra;

namespace OrderUnfold.Numerics;

/// <summary>
/// A small Levenberg–Marquardt minimiser of Σ rᵢ² for the calibration fits (a handful to a few dozen
/// parameters, up to some ten thousand residuals). The caller supplies the whitened residuals
/// r = (y − model)/σ and the whitened Jacobian J = ∂model/∂p / σ; the step solves
/// (JᵀJ + λ·diag(JᵀJ)) δ = Jᵀr.
/// </summary>
public static class DampedLeastSquares
{
    /// <summary>Fills <c>residual</c> (length m) and, when <c>jacobian</c> is not null, the m × n Jacobian of the model.</summary>
    public delegate void Evaluate(double[] parameters, double[] residual, double[,]? jacobian);

    /// <summary>Outcome of a minimisation.</summary>
    /// <param name="Parameters">Best parameters found.</param>
    /// <param name="ChiSquare">Σ r² at the best parameters.</param>
    /// <param name="Covariance">(JᵀJ)⁻¹ at the best parameters (unscaled), or null when singular.</param>
    /// <param name="Iterations">Iterations used.</param>
    /// <param name="Converged">True when the relative χ² change and the step fell below the tolerance.</param>
    public sealed record Result(double[] Parameters, double ChiSquare, Matrix<double>? Covariance, int Iterations, bool Converged);

    /// <param name="evaluate">Residuals and Jacobian.</param>
    /// <param name="start">Starting parameters.</param>
    /// <param name="residualCount">Number of residuals.</param>
    /// <param name="maxIterations">Most iterations.</param>
    /// <param name="tolerance">Relative χ² change (and relative step) below which the fit has converged.</param>
    /// <param name="lower">Lower bounds, or null.</param>
    /// <param name="upper">Upper bounds, or null.</param>
    /// <param name="crawlChiSquare">With whitened residuals, an absolute χ² gain per step below which a step counts as a
    /// crawl; five crawling steps in a row end the fit as converged (a χ² change far below 1 moves no parameter by a
    /// meaningful fraction of its uncertainty). 0: off.</param>
    /// <param name="keepGoing">Asked before each iteration; false stops the fit where it is (a shared work budget).</param>
    public static Result Minimize(Evaluate evaluate, double[] start, int residualCount, int maxIterations = 100, double tolerance = 1e-9,
        double[]? lower = null, double[]? upper = null, double crawlChiSquare = 0, Func<bool>? keepGoing = null)
    {
        var n = start.Length;
        var p = (double[])start.Clone();
        Clamp(p, lower, upper);
        var r = new double[residualCount];
        var jac = new double[residualCount, n];
        evaluate(p, r, jac);
        var chi = SumSquares(r);
        var lambda = 1e-3;
        var converged = false;
        var it = 0;
        var trial = new double[n];
        var rTrial = new double[residualCount];
        var crawling = 0;
        for (; it < maxIterations; it++)
        {
            if (keepGoing is not null && !keepGoing()) break;
            var (a, g) = Normal(jac, r, n);
            var improved = false;
            for (var attempt = 0; attempt < 12; attempt++)
            {
                var m = a.Clone();
                for (var i = 0; i < n; i++) m[i, i] += lambda * Math.Max(a[i, i], 1e-300);
                Vector<double> step;
                try
                {
                    step = m.Cholesky().Solve(g);
                }
                catch (Exception e) when (e is ArgumentException or InvalidOperationException)
                {
                    lambda *= 10;
                    continue;
                }

                for (var i = 0; i < n; i++) trial[i] = p[i] + step[i];
                Clamp(trial, lower, upper);
                evaluate(trial, rTrial, null);
                var chiTrial = SumSquares(rTrial);
                if (double.IsFinite(chiTrial) && chiTrial <= chi)
                {
                    var relative = (chi - chiTrial) / Math.Max(chi, 1e-300);
                    crawling = chi - chiTrial < crawlChiSquare ? crawling + 1 : 0;
                    var stepSmall = true;
                    for (var i = 0; i < n; i++)
                        if (Math.Abs(step[i]) > tolerance * 1e3 * (Math.Abs(p[i]) + 1e-12)) stepSmall = false;
                    Array.Copy(trial, p, n);
                    chi = chiTrial;
                    lambda = Math.Max(lambda / 4, 1e-12);
                    improved = true;
                    if (relative < tolerance || stepSmall || crawling >= 5) converged = true;
                    break;
                }

                lambda *= 5;
            }

            evaluate(p, r, jac);
            if (!improved)
            {
                converged = true; // no downhill step at any damping: a minimum within numerical precision
                break;
            }

            if (converged) break;
        }

        var (final, _) = Normal(jac, r, n);
        Matrix<double>? cov = null;
        try
        {
            var inv = final.Inverse();
            if (inv.Enumerate().All(double.IsFinite)) cov = inv;
        }
        catch (Exception e) when (e is ArgumentException or InvalidOperationException)
        {
            cov = null;
        }

        return new Result(p, chi, cov, it + 1, converged);
    }

    private static (Matrix<double> A, Vector<double> G) Normal(double[,] jac, double[] r, int n)
    {
        var a = Matrix<double>.Build.Dense(n, n);
        var g = Vector<double>.Build.Dense(n);
        var m = r.Length;
        var row = new double[n];
        for (var k = 0; k < m; k++)
        {
            var any = false;
            for (var i = 0; i < n; i++)
            {
                row[i] = jac[k, i];
                if (row[i] != 0) any = true;
            }

            if (!any) continue;
            for (var i = 0; i < n; i++)
            {
                var ji = row[i];
                if (ji == 0) continue;
                g[i] += ji * r[k];
                for (var j = i; j < n; j++) a[i, j] += ji * row[j];
            }
        }

        for (var i = 0; i < n; i++)
            for (var j = 0; j < i; j++) a[i, j] = a[j, i];
        return (a, g);
    }

    private static double SumSquares(double[] r)
    {
        var s = 0.0;
        foreach (var v in r) s += v * v;
        return s;
    }

    private static void Clamp(double[] p, double[]? lower, double[]? upper)
    {
        for (var i = 0; i < p.Length; i++)
        {
            if (lower is not null && p[i] < lower[i]) p[i] = lower[i];
            if (upper is not null && p[i] > upper[i]) p[i] = upper[i];
        }
    }
}
