namespace OrderUnfold.Analysis;

/// <summary>A weighted least-squares problem as the Levenberg–Marquardt solver sees it: χ²(p) = Σ wᵢ(yᵢ − mᵢ(p))².</summary>
internal interface ILeastSquaresProblem
{
    /// <summary>Number of parameters.</summary>
    int Count { get; }

    /// <summary>Fills the normal equations at <paramref name="p"/> — <paramref name="jtj"/> = JᵀWJ (row-major Count × Count,
    /// both triangles) and <paramref name="jtr"/> = JᵀW(y − m) with J = ∂m/∂p — and returns χ² there.</summary>
    double Normal(double[] p, double[] jtj, double[] jtr);
}

/// <summary>Why <see cref="LevenbergMarquardt.Minimise"/> stopped.</summary>
internal enum LmExit
{
    /// <summary>The last accepted step was below the step tolerance (in scaled units).</summary>
    SmallStep,

    /// <summary>The predicted and achieved decrease of χ² fell below the χ² tolerance: a minimum to working precision.</summary>
    SmallDecrease,

    /// <summary>No step, however strongly damped, lowers χ² any more: a minimum to rounding.</summary>
    NoFurtherDecrease,

    /// <summary>The iteration limit was reached.</summary>
    IterationLimit,

    /// <summary>The model or its derivatives gave a non-finite value at the start.</summary>
    NonFinite,
}

/// <summary>Outcome of <see cref="LevenbergMarquardt.Minimise"/>. <see cref="Fisher"/> is JᵀWJ at <see cref="P"/> (row-major).</summary>
internal sealed record LmOutcome(double[] P, double ChiSquare, double[] Fisher, LmExit Exit, int Iterations)
{
    /// <summary>Stopped on a convergence criterion.</summary>
    public bool Converged => Exit is LmExit.SmallStep or LmExit.SmallDecrease or LmExit.NoFurtherDecrease;
}

/// <summary>
/// Levenberg–Marquardt minimisation of a weighted sum of squares on its normal equations (the problem fills JᵀWJ and
/// JᵀW r directly, so no samples × parameters Jacobian is ever stored). Damping μ·D with D the diagonal of JᵀWJ in the
/// parameters' own scales (Marquardt 1963), μ updated from the gain ratio as in Nielsen (1999) / Madsen, Nielsen &amp;
/// Tingleff, "Methods for non-linear least squares problems" (2004), Algorithm 3.16. Fixed parameters do not move.
/// </summary>
internal static class LevenbergMarquardt
{
    /// <param name="problem">The problem.</param>
    /// <param name="p0">Start values (not modified).</param>
    /// <param name="scales">Typical size of each parameter: steps are measured in these units.</param>
    /// <param name="isFixed">Parameters held at their start values (null: none).</param>
    /// <param name="maxIterations">Iteration limit (an iteration is one solve of the damped normal equations).</param>
    /// <param name="stepTolerance">Stop when no parameter moves by more than this many of its scales (relative to its size when that is larger).</param>
    /// <param name="chiSquareTolerance">Stop when a full step would lower χ² by less than this (absolute; χ² differences below it carry no information).</param>
    public static LmOutcome Minimise(ILeastSquaresProblem problem, double[] p0, double[] scales, bool[]? isFixed, int maxIterations,
        double stepTolerance = 1e-9, double chiSquareTolerance = 1e-9)
    {
        var n = problem.Count;
        var free = Enumerable.Range(0, n).Where(i => isFixed is null || !isFixed[i]).ToArray();
        var f = free.Length;
        var p = (double[])p0.Clone();
        var jtj = new double[n * n];
        var jtr = new double[n];
        var chi = problem.Normal(p, jtj, jtr);
        if (!double.IsFinite(chi) || !jtj.All(double.IsFinite) || !jtr.All(double.IsFinite))
            return new LmOutcome(p, chi, jtj, LmExit.NonFinite, 0);
        if (f == 0) return new LmOutcome(p, chi, jtj, LmExit.SmallStep, 0);

        // work in scaled parameters q = p / s: A = S·JᵀWJ·S, g = S·JᵀW r
        var a = new double[f * f];
        var g = new double[f];
        var d = new double[f];
        var h = new double[f];
        var chol = new double[f * f];
        var trial = new double[n];
        var nextJtj = new double[n * n];
        var nextJtr = new double[n];

        void Scaled()
        {
            for (var u = 0; u < f; u++)
            {
                var su = scales[free[u]];
                g[u] = su * jtr[free[u]];
                for (var v = 0; v < f; v++) a[u * f + v] = su * scales[free[v]] * jtj[free[u] * n + free[v]];
                d[u] = Math.Max(d[u], a[u * f + u]); // Moré (1978): the scaling only grows, which keeps steps bounded
            }
        }

        Scaled();
        var dMax = d.Max();
        if (!(dMax > 0)) return new LmOutcome(p, chi, jtj, LmExit.SmallStep, 0);
        for (var u = 0; u < f; u++) d[u] = Math.Max(d[u], 1e-12 * dMax);
        var mu = 1e-3;
        var nu = 2.0;
        for (var iteration = 1; iteration <= maxIterations; iteration++)
        {
            Cancellation.ThrowIfRequested(); // Ctrl-C / SIGTERM (Cancellation.cs)
            // solve (A + μD) h = g by Cholesky; a failed factorisation (A not positive definite) raises the damping
            for (var i = 0; i < f * f; i++) chol[i] = a[i];
            for (var u = 0; u < f; u++) chol[u * f + u] += mu * d[u];
            if (!Cholesky(chol, f))
            {
                mu *= nu;
                nu *= 2;
                if (mu > 1e20) return new LmOutcome(p, chi, jtj, LmExit.NoFurtherDecrease, iteration);
                continue;
            }

            Solve(chol, f, g, h);
            double predicted = 0, stepMax = 0, sizeMax = 0;
            for (var u = 0; u < f; u++)
            {
                predicted += h[u] * (mu * d[u] * h[u] + g[u]);
                stepMax = Math.Max(stepMax, Math.Abs(h[u]));
                sizeMax = Math.Max(sizeMax, Math.Abs(p[free[u]] / scales[free[u]]));
            }

            if (stepMax <= stepTolerance * (1 + sizeMax) || (predicted < chiSquareTolerance && mu < 1))
                return new LmOutcome(p, chi, jtj, stepMax <= stepTolerance * (1 + sizeMax) ? LmExit.SmallStep : LmExit.SmallDecrease, iteration);

            Array.Copy(p, trial, n);
            for (var u = 0; u < f; u++) trial[free[u]] += scales[free[u]] * h[u];
            // the normal equations at the trial point are needed when it is accepted, which is the usual case near a minimum
            var chiNext = problem.Normal(trial, nextJtj, nextJtr);
            var finite = double.IsFinite(chiNext) && nextJtj.All(double.IsFinite) && nextJtr.All(double.IsFinite);
            var rho = finite && predicted > 0 ? (chi - chiNext) / predicted : -1;
            if (rho > 0)
            {
                var decrease = chi - chiNext;
                Array.Copy(trial, p, n);
                (jtj, nextJtj) = (nextJtj, jtj);
                (jtr, nextJtr) = (nextJtr, jtr);
                chi = chiNext;
                Scaled();
                var t = 2 * rho - 1;
                mu *= Math.Max(1.0 / 3, 1 - t * t * t);
                nu = 2;
                if (decrease < chiSquareTolerance && predicted < 2 * chiSquareTolerance)
                    return new LmOutcome(p, chi, jtj, LmExit.SmallDecrease, iteration);
            }
            else
            {
                mu *= nu;
                nu *= 2;
                if (mu > 1e20) return new LmOutcome(p, chi, jtj, LmExit.NoFurtherDecrease, iteration);
            }
        }

        return new LmOutcome(p, chi, jtj, LmExit.IterationLimit, maxIterations);
    }

    /// <summary>In-place Cholesky factorisation (lower triangle) of a symmetric n×n row-major matrix; false when not positive definite.</summary>
    internal static bool Cholesky(double[] m, int n)
    {
        for (var j = 0; j < n; j++)
        {
            var s = m[j * n + j];
            for (var k = 0; k < j; k++) s -= m[j * n + k] * m[j * n + k];
            if (!(s > 0)) return false;
            var l = Math.Sqrt(s);
            m[j * n + j] = l;
            for (var i = j + 1; i < n; i++)
            {
                var t = m[i * n + j];
                for (var k = 0; k < j; k++) t -= m[i * n + k] * m[j * n + k];
                m[i * n + j] = t / l;
            }
        }

        return true;
    }

    /// <summary>Solves L Lᵀ x = b with the factor from <see cref="Cholesky"/>.</summary>
    internal static void Solve(double[] l, int n, double[] b, double[] x)
    {
        for (var i = 0; i < n; i++)
        {
            var t = b[i];
            for (var k = 0; k < i; k++) t -= l[i * n + k] * x[k];
            x[i] = t / l[i * n + i];
        }

        for (var i = n - 1; i >= 0; i--)
        {
            var t = x[i];
            for (var k = i + 1; k < n; k++) t -= l[k * n + i] * x[k];
            x[i] = t / l[i * n + i];
        }
    }
}
