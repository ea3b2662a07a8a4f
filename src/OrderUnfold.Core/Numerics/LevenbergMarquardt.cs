namespace OrderUnfold.Numerics;

/// <summary>A weighted least-squares problem as the Levenberg–Marquardt solver sees it: χ²(p) = Σ wᵢ(yᵢ − mᵢ(p))².</summary>
public interface ILeastSquaresProblem
{
    /// <summary>Number of parameters.</summary>
    int Count { get; }

    /// <summary>Fills the normal equations at <paramref name="p"/> — <paramref name="jtj"/> = JᵀWJ (row-major Count × Count,
    /// both triangles) and <paramref name="jtr"/> = JᵀW(y − m) with J = ∂m/∂p — and returns χ² there.</summary>
    double Normal(double[] p, double[] jtj, double[] jtr);

    /// <summary>Optional block structure of JᵀWJ: a block number per parameter (≥ 0) or −1 for parameters that may couple
    /// to every block (the border). Entries between two different blocks ≥ 0 are zero; the solver then factorises the
    /// damped matrix block by block (an arrowhead Cholesky, no fill-in between blocks). Null: dense.</summary>
    int[]? Blocks => null;
}

/// <summary>
/// The work limits shared by every fit of one analysis stage: a count of iterations (each Levenberg–Marquardt solve,
/// each Gauss–Newton step of a quick refit, each bootstrap replicate's iterations) and a limit on the CPU time of the
/// calling thread. When either is used up, <see cref="Exhausted"/> says which and every fit that shares the budget
/// stops at its next iteration. Progress messages are passed on at most about once per second of wall time.
/// </summary>
public sealed class WorkBudget
{
    private readonly double _cpuStart;
    private readonly System.Diagnostics.Stopwatch _clock = System.Diagnostics.Stopwatch.StartNew();
    private readonly IProgress<string>? _progress;
    private double _lastReport = double.NegativeInfinity;

    /// <param name="iterations">Iterations allowed in all (≤ 0: none).</param>
    /// <param name="cpuSeconds">CPU seconds of the calling thread allowed (not finite or ≤ 0: no limit).</param>
    /// <param name="progress">Where progress lines go.</param>
    public WorkBudget(int iterations, double cpuSeconds, IProgress<string>? progress = null)
    {
        IterationLimit = iterations;
        CpuLimitSeconds = cpuSeconds;
        _progress = progress;
        _cpuStart = ThreadCpuSeconds();
    }

    /// <summary>An unlimited budget (for fits that must not be cut short, e.g. inside tests of the solver).</summary>
    public static WorkBudget Unlimited() => new(int.MaxValue, double.PositiveInfinity);

    public int IterationLimit { get; }
    public double CpuLimitSeconds { get; }

    /// <summary>Iterations spent so far.</summary>
    public int Used { get; private set; }

    /// <summary>Null while work may go on; otherwise which limit was reached, in words.</summary>
    public string? Exhausted { get; private set; }

    /// <summary>CPU seconds of the calling thread since the budget was made.</summary>
    public double CpuSeconds => ThreadCpuSeconds() - _cpuStart;

    /// <summary>Counts <paramref name="iterations"/>; false (and <see cref="Exhausted"/> set) when a limit is reached.</summary>
    public bool Spend(int iterations = 1)
    {
        if (Exhausted is not null) return false;
        Used += iterations;
        if (Used > IterationLimit)
        {
            Exhausted = $"the iteration budget ({IterationLimit}) was used up";
            return false;
        }

        if (double.IsFinite(CpuLimitSeconds) && CpuLimitSeconds > 0 && CpuSeconds > CpuLimitSeconds)
        {
            Exhausted = $"the CPU-time budget ({CpuLimitSeconds:G3} s) was used up";
            return false;
        }

        return true;
    }

    /// <summary>Passes a progress line on (with the iterations spent), at most about once a second unless <paramref name="force"/>.</summary>
    public void Report(string message, bool force = false)
    {
        if (_progress is null) return;
        var now = _clock.Elapsed.TotalSeconds;
        if (!force && now - _lastReport < 1) return;
        _lastReport = now;
        _progress.Report($"{message} ({Used} iterations)");
    }

    /// <summary>CPU time of the calling thread (Linux: clock_gettime(CLOCK_THREAD_CPUTIME_ID); elsewhere the process's).</summary>
    public static double ThreadCpuSeconds()
    {
        if (OperatingSystem.IsLinux())
        {
            try
            {
                if (clock_gettime(3, out var ts) == 0) return ts.Seconds + 1e-9 * ts.Nanoseconds;
            }
            catch (Exception e) when (e is DllNotFoundException or EntryPointNotFoundException)
            {
                // fall through
            }
        }

        return System.Diagnostics.Process.GetCurrentProcess().TotalProcessorTime.TotalSeconds;
    }

    [System.Runtime.InteropServices.StructLayout(System.Runtime.InteropServices.LayoutKind.Sequential)]
    private struct TimeSpec
    {
        public long Seconds;
        public long Nanoseconds;
    }

    [System.Runtime.InteropServices.DllImport("libc", EntryPoint = "clock_gettime")]
    private static extern int clock_gettime(int clock, out TimeSpec time);
}

/// <summary>Why <see cref="LevenbergMarquardt.Minimise"/> stopped.</summary>
public enum LmExit
{
    /// <summary>The last accepted step was below the step tolerance (in scaled units).</summary>
    SmallStep,

    /// <summary>The predicted and achieved decrease of χ² fell below the χ² tolerance: a minimum to working precision.</summary>
    SmallDecrease,

    /// <summary>No step, however strongly damped, lowers χ² any more: a minimum to rounding.</summary>
    NoFurtherDecrease,

    /// <summary>The iteration limit was reached.</summary>
    IterationLimit,

    /// <summary>The shared <see cref="WorkBudget"/> was used up.</summary>
    Budget,

    /// <summary>The model or its derivatives gave a non-finite value at the start.</summary>
    NonFinite,
}

/// <summary>Outcome of <see cref="LevenbergMarquardt.Minimise"/>. <see cref="Fisher"/> is JᵀWJ at <see cref="P"/> (row-major).</summary>
public sealed record LmOutcome(double[] P, double ChiSquare, double[] Fisher, LmExit Exit, int Iterations)
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
public static class LevenbergMarquardt
{
    /// <summary>Accepted steps in a row that each lower χ² by less than the tolerance after which the fit stops.</summary>
    public const int CrawlSteps = 5;

    /// <param name="problem">The problem.</param>
    /// <param name="p0">Start values (not modified).</param>
    /// <param name="scales">Typical size of each parameter: steps are measured in these units.</param>
    /// <param name="isFixed">Parameters held at their start values (null: none).</param>
    /// <param name="maxIterations">Iteration limit (an iteration is one solve of the damped normal equations).</param>
    /// <param name="stepTolerance">Stop when no parameter moves by more than this many of its scales (relative to its size when that is larger).</param>
    /// <param name="chiSquareTolerance">Stop when a full step would lower χ² by less than this (absolute; χ² differences below it carry no information).</param>
    /// <param name="budget">Shared work limits (null: only <paramref name="maxIterations"/>); each iteration spends one.</param>
    public static LmOutcome Minimise(ILeastSquaresProblem problem, double[] p0, double[] scales, bool[]? isFixed, int maxIterations,
        double stepTolerance = 1e-9, double chiSquareTolerance = 1e-9, WorkBudget? budget = null)
    {
        var n = problem.Count;
        // free parameters ordered block by block, the border last: the damped matrix is then block-arrowhead and its
        // Cholesky factor stays within each row's envelope (first[u]: the first column that can be non-zero in row u)
        var blocks = problem.Blocks;
        var free = Enumerable.Range(0, n).Where(i => isFixed is null || !isFixed[i])
            .OrderBy(i => blocks is null ? 0 : blocks[i] < 0 ? int.MaxValue : blocks[i]).ThenBy(i => i).ToArray();
        var f = free.Length;
        var first = new int[f];
        for (var u = 1; u < f; u++)
        {
            var bu = blocks is null ? -1 : blocks[free[u]];
            first[u] = bu >= 0 && blocks![free[u - 1]] == bu ? first[u - 1] : bu >= 0 ? u : 0;
        }

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
        var crawl = 0;
        for (var iteration = 1; iteration <= maxIterations; iteration++)
        {
            Cancellation.ThrowIfRequested(); // Ctrl-C / SIGTERM (Cancellation.cs)
            if (budget is not null && !budget.Spend()) return new LmOutcome(p, chi, jtj, LmExit.Budget, iteration - 1);
            // solve (A + μD) h = g by Cholesky; a failed factorisation (A not positive definite) raises the damping
            for (var i = 0; i < f * f; i++) chol[i] = a[i];
            for (var u = 0; u < f; u++) chol[u * f + u] += mu * d[u];
            if (!Cholesky(chol, f, first))
            {
                mu *= nu;
                nu *= 2;
                if (mu > 1e20) return new LmOutcome(p, chi, jtj, LmExit.NoFurtherDecrease, iteration);
                continue;
            }

            Solve(chol, f, g, h, first);
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
                // a crawl: accepted steps that each lower χ² by less than the tolerance while the model predicts more (a
                // mismatched model near its best) end the fit after a few in a row instead of running to the limit
                crawl = decrease < chiSquareTolerance ? crawl + 1 : 0;
                if (crawl >= CrawlSteps) return new LmOutcome(p, chi, jtj, LmExit.SmallDecrease, iteration);
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
