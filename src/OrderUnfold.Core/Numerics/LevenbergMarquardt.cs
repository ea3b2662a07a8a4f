namespace OrderUnfold.Numerics;

/// <summary>
/// Levenberg–Marquardt minimisation of a weighted sum of squares on its normal equations (the problem fills JᵀWJ and
/// JᵀW r directly, so no samples × parameters Jacobian need be stored; <see cref="ResidualProblem"/> builds them from
/// residuals and a dense Jacobian). Damping μ·D with D the diagonal of JᵀWJ in the parameters' own scales (Marquardt
/// 1963), μ updated from the gain ratio as in Nielsen (1999) / Madsen, Nielsen &amp; Tingleff, "Methods for non-linear
/// least squares problems" (2004), Algorithm 3.16. Fixed parameters do not move; bounded ones are clamped into their box.
/// </summary>
public static class LevenbergMarquardt
{
    /// <summary>Accepted steps in a row that each lower χ² by less than the crawl threshold after which the fit stops.</summary>
    public const int CrawlSteps = 5;

    /// <param name="problem">The problem.</param>
    /// <param name="p0">Start values (not modified).</param>
    /// <param name="scales">Typical size of each parameter: steps are measured in these units.</param>
    /// <param name="isFixed">Parameters held at their start values (null: none).</param>
    /// <param name="maxIterations">Iteration limit (an iteration is one solve of the damped normal equations).</param>
    /// <param name="stepTolerance">Stop when no parameter moves by more than this many of its scales (relative to its size when that is larger).</param>
    /// <param name="chiSquareTolerance">Stop when a full step would lower χ² by less than this (absolute; χ² differences below it carry no information).</param>
    /// <param name="budget">Shared work limits (null: only <paramref name="maxIterations"/>); each iteration spends one.</param>
    /// <param name="cancellationToken">Checked before each iteration (<see cref="LmSettings.CancellationToken"/>).</param>
    public static LmOutcome Minimise(ILeastSquaresProblem problem, double[] p0, double[] scales, bool[]? isFixed, int maxIterations,
        double stepTolerance = 1e-9, double chiSquareTolerance = 1e-9, WorkBudget? budget = null, CancellationToken cancellationToken = default) =>
        Minimise(problem, p0, new LmSettings
        {
            Scales = scales, IsFixed = isFixed, MaxIterations = maxIterations, StepTolerance = stepTolerance,
            ChiSquareTolerance = chiSquareTolerance, Budget = budget, CancellationToken = cancellationToken,
        });

    /// <summary>Minimises χ² of <paramref name="problem"/> from <paramref name="p0"/> (not modified) under <paramref name="settings"/>.</summary>
    public static LmOutcome Minimise(ILeastSquaresProblem problem, double[] p0, LmSettings settings) =>
        new LevenbergMarquardtRun(problem, p0, settings).Minimise();

    /// <summary>Minimises Σ r² of whitened residuals (see <see cref="ResidualFunction"/>) from <paramref name="start"/>.</summary>
    public static LmOutcome MinimiseResiduals(ResidualFunction evaluate, double[] start, int residualCount, LmSettings settings) =>
        Minimise(new ResidualProblem(evaluate, start.Length, residualCount), start, settings);

    /// <summary>In-place Cholesky factorisation (lower triangle) of a symmetric n×n row-major matrix; false when not positive
    /// definite. With <paramref name="first"/> (envelope: row i is zero left of column first[i], and first is non-decreasing
    /// within a block), only the envelope is computed — a block-arrowhead matrix costs Σ (block size)³ plus the border rows.</summary>
    public static bool Cholesky(double[] m, int n, int[]? first = null)
    {
        for (var j = 0; j < n; j++)
        {
            var fj = first?[j] ?? 0;
            var s = m[j * n + j];
            for (var k = fj; k < j; k++) s -= m[j * n + k] * m[j * n + k];
            if (!(s > 0)) return false;
            var l = Math.Sqrt(s);
            m[j * n + j] = l;
            for (var i = j + 1; i < n; i++)
            {
                var fi = first?[i] ?? 0;
                if (fi > j)
                {
                    m[i * n + j] = 0;
                    continue;
                }

                var t = m[i * n + j];
                for (var k = Math.Max(fi, fj); k < j; k++) t -= m[i * n + k] * m[j * n + k];
                m[i * n + j] = t / l;
            }
        }

        return true;
    }

    /// <summary>Solves L Lᵀ x = b with the factor from <see cref="Cholesky"/> (the same envelope, if any).</summary>
    public static void Solve(double[] l, int n, double[] b, double[] x, int[]? first = null)
    {
        for (var i = 0; i < n; i++)
        {
            var t = b[i];
            for (var k = first?[i] ?? 0; k < i; k++) t -= l[i * n + k] * x[k];
            x[i] = t / l[i * n + i];
        }

        for (var i = n - 1; i >= 0; i--)
        {
            var t = x[i];
            for (var k = i + 1; k < n; k++)
            {
                if (first is not null && first[k] > i) continue;
                t -= l[k * n + i] * x[k];
            }

            x[i] = t / l[i * n + i];
        }
    }
}
