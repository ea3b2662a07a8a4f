namespace OrderUnfold.Inversion;

/// <summary>Normal equations that can give their diagonal cheaply (used as a Jacobi preconditioner).</summary>
public interface INormalDiagonal
{
    /// <summary>G[j, j], penalties included.</summary>
    double Diagonal(int j);
}

/// <summary>Normal equations with a cheap approximate inverse z ≈ G⁻¹ r (symmetric positive definite), used to
/// precondition the conjugate gradients.</summary>
public interface INormalPreconditioner
{
    /// <summary>z = P r for a full-length r (entries outside the current face are zero in r and ignored in z).</summary>
    void Precondition(ReadOnlySpan<double> r, Span<double> z);
}

/// <summary>A preconditioner whose columns P e_j come cheaper than a general application.</summary>
public interface INormalPreconditionerColumns
{
    /// <summary>z = P e_j (full length).</summary>
    void Column(int j, Span<double> z);
}

/// <summary>
/// NNLS for dense support: minimises ½ xᵀGx − bᵀx subject to x ≥ 0 on the constrained entries by gradient projection
/// with conjugate gradients on the current face (Moré &amp; Toraldo, "On the solution of large quadratic programming
/// problems with bound constraints", SIAM J. Optim. 1, 93–113, 1991). Each outer iteration takes a few scaled
/// projected-gradient steps with a projected Armijo search, which may fix or release many bounds at once, then runs
/// Jacobi-preconditioned conjugate gradients on the entries that are positive (or free) and a projected search along
/// the result. Every step costs one or a few matrix-free products G x (O(n + M log M) for <see cref="UnfoldProblem"/>),
/// never a factorisation, so the cost does not grow with the number of active entries as the active-set solver's does.
/// It stops when the KKT conditions hold within the tolerance, or at the product budget with an honest status.
/// </summary>
public static class DenseNnls
{
    /// <summary>Limits and tolerances of the dense solvers.</summary>
    public sealed record Options
    {
        /// <summary>Absolute KKT tolerance in gradient units (as <see cref="ActiveSetNnls.Options.Tolerance"/>).</summary>
        public double Tolerance { get; init; }

        /// <summary>KKT tolerance relative to the largest |b_j|; the larger of the two tolerances applies.</summary>
        public double RelativeTolerance { get; init; } = 1e-8;

        /// <summary>Most outer iterations (each: a few gradient-projection steps and one conjugate-gradient run).</summary>
        public int MaxIterations { get; init; } = 1000;

        /// <summary>Most products G x in all: the bound on the cost.</summary>
        public int MaxProducts { get; init; } = 20_000;

        /// <summary>Most conjugate-gradient steps per face.</summary>
        public int MaxCgSteps { get; init; } = 1000;
    }

    private const double Armijo = 1e-4;

    /// <summary>Conjugate gradients on a face stop when a step gains less than this fraction of the best step's decrease
    /// (the rule of Moré &amp; Toraldo, with a smaller factor).</summary>
    private const double CgStop = 1e-3;

    /// <summary>Solves for dense support: projected Newton with the Toeplitz preconditioner where the equations provide one, else gradient projection; KKT checked at the end with a fresh product.
    /// A cancelled <paramref name="cancellationToken"/> stops the solve before its next iteration (<see cref="OperationCanceledException"/>).</summary>
    public static NnlsResult Solve(INormalEquations eq, Options? options = null, ReadOnlySpan<double> start = default,
        CancellationToken cancellationToken = default)
    {
        options ??= new Options();
        // the unfolding problem's Toeplitz structure gives a preconditioner strong enough for a projected Newton method;
        // without it (other problems, grids beyond its size limit, no positive definite approximation) gradient projection
        var fallback = "";
        if (eq is UnfoldProblem problem)
        {
            var toeplitz = ToeplitzPreconditioner.TryCreate(problem, out var why);
            if (toeplitz is not null)
            {
                var newton = ProjectedNewtonNnls.Solve(eq, toeplitz, options, start, "Toeplitz", cancellationToken);
                if (newton.Status != SolverStatus.InvalidValues && newton.Status != SolverStatus.Converged)
                {
                    // the projected Newton method did not settle (many entries moving between zero and positive, long
                    // conjugate-gradient runs): gradient projection continues from its iterate with its own product budget,
                    // so the answer is never worse than gradient projection alone and the cost stays bounded (two budgets)
                    var finish = SolveByGradientProjection(eq, options, newton.Solution, cancellationToken);
                    return finish with
                    {
                        Message = $"{finish.Message} (projected Newton did not converge: {newton.Message}; gradient projection continued from its iterate)",
                        Products = finish.Products + newton.Products,
                        Iterations = finish.Iterations + newton.Iterations,
                    };
                }

                return newton;
            }

            fallback = $" (gradient projection: no Toeplitz preconditioner, {why})";
        }

        var result = SolveByGradientProjection(eq, options, start, cancellationToken);
        return fallback.Length == 0 ? result : result with { Message = result.Message + fallback };
    }

    private static NnlsResult SolveByGradientProjection(INormalEquations eq, Options options, ReadOnlySpan<double> start,
        CancellationToken cancellationToken) =>
        new GradientProjectionRun(eq, options, start).Solve(cancellationToken);

    /// <summary>The checks before each outer iteration of the dense solvers, in order: non-finite values, the KKT
    /// conditions within the tolerance, the iteration and product limits. True (with the status and message) when the
    /// solver stops.</summary>
    internal static bool StopsBeforeIteration(bool finite, double violation, double tol, int iterations, int products,
        Options options, out SolverStatus status, out string message)
    {
        status = SolverStatus.IterationLimit;
        message = "";
        if (!finite)
        {
            status = SolverStatus.InvalidValues;
            message = "gradient has non-finite values";
            return true;
        }

        if (violation <= tol)
        {
            status = SolverStatus.Converged;
            message = "KKT conditions hold";
            return true;
        }

        if (iterations >= options.MaxIterations || products >= options.MaxProducts)
        {
            message = $"stopped after {iterations} iterations and {products} products G x (limits {options.MaxIterations}, {options.MaxProducts}); KKT violation {violation:G3} > tolerance {tol:G3}";
            return true;
        }

        return false;
    }

    /// <summary>The verdict of a dense solver that made no progress for three iterations, from the KKT violation
    /// <paramref name="violation"/> of its iterate.</summary>
    internal static (SolverStatus Status, string Message) StalledVerdict(double violation, double tol, int iterations) =>
        violation <= tol
            ? (SolverStatus.Converged, "KKT conditions hold")
            : (SolverStatus.IterationLimit, $"no further progress after {iterations} iterations; KKT violation {violation:G3} > tolerance {tol:G3}");

    /// <summary>One gradient-projection solve: the iterate, its product and gradient, the Jacobi scaling and the work
    /// vectors, with one method per phase of an outer iteration.</summary>
    private sealed class GradientProjectionRun
    {
        private readonly INormalEquations _eq;
        private readonly Options _options;
        private readonly int _n;
        private readonly double[] _b;
        private readonly bool[] _free;
        private readonly double[] _inv; // Jacobi scaling
        private readonly INormalPreconditioner? _pre;
        private readonly double[] _x, _gx, _g;
        private readonly double[] _xt, _gxt, _p, _gp, _r, _z, _dir;
        private readonly bool[] _inFace;
        private readonly bool[] _binding;
        private readonly double _tol;
        private double _q; // objective ½ xᵀGx − bᵀx
        private int _products;
        private bool _moved;

        public GradientProjectionRun(INormalEquations eq, Options options, ReadOnlySpan<double> start)
        {
            _eq = eq;
            _options = options;
            var n = _n = eq.Count;
            _b = eq.RightHandSide.ToArray();
            _free = new bool[n];
            for (var j = 0; j < n; j++) _free[j] = eq.IsFree(j);
            _inv = JacobiScaling(eq, n);
            _x = new double[n];
            if (start.Length == n)
                for (var j = 0; j < n; j++) _x[j] = _free[j] ? start[j] : Math.Max(0, start[j]);
            _gx = new double[n];
            _g = new double[n];
            Product(_x, _gx);
            for (var j = 0; j < n; j++) _g[j] = _gx[j] - _b[j];
            _q = Objective(_x, _gx);
            var bMax = 0.0;
            for (var j = 0; j < n; j++) bMax = Math.Max(bMax, Math.Abs(_b[j]));
            _tol = Math.Max(options.Tolerance, options.RelativeTolerance * bMax);
            _pre = eq as INormalPreconditioner;
            _xt = new double[n];
            _gxt = new double[n];
            _p = new double[n];
            _gp = new double[n];
            _r = new double[n];
            _z = new double[n];
            _dir = new double[n];
            _inFace = new bool[n];
            _binding = new bool[n];
        }

        private static double[] JacobiScaling(INormalEquations eq, int n)
        {
            var inv = new double[n];
            var diagonal = eq as INormalDiagonal;
            for (var j = 0; j < n; j++)
            {
                var d = diagonal?.Diagonal(j) ?? 1;
                inv[j] = d > 0 && double.IsFinite(d) ? 1 / d : 0;
            }

            var meanInv = inv.Where(v => v > 0).DefaultIfEmpty(1).Average();
            for (var j = 0; j < n; j++) if (inv[j] == 0) inv[j] = meanInv;
            return inv;
        }

        private double Objective(double[] v, double[] gv)
        {
            var s = 0.0;
            for (var j = 0; j < _n; j++) s += v[j] * (0.5 * gv[j] - _b[j]);
            return s;
        }

        private void Product(double[] v, double[] result)
        {
            _eq.Multiply(v, result);
            _products++;
        }

        // g = Gx − b is kept with gx, so the violation is the one every solver's final check uses
        private double Violation() => NnlsResult.KktViolationOf(_b, _gx, _x, _free).Violation;

        public NnlsResult Solve(CancellationToken cancellationToken)
        {
            SolverStatus status;
            string message;
            var iterations = 0;
            var stalls = 0;
            while (true)
            {
                cancellationToken.ThrowIfCancellationRequested();
                var violation = Violation();
                if (StopsBeforeIteration(double.IsFinite(violation) && double.IsFinite(_q), violation, _tol, iterations,
                        _products, _options, out status, out message)) break;
                iterations++;
                _moved = false;
                ProjectedGradientSteps();
                FaceConjugateGradients();
                if (!_moved)
                {
                    // neither phase moved: the projected searches found no decrease (round-off level)
                    if (++stalls >= 3)
                    {
                        (status, message) = StalledVerdict(Violation(), _tol, iterations);
                        break;
                    }
                }
                else
                {
                    stalls = 0;
                }
            }

            // KKT check on the returned point (the same definition as the active-set solver)
            Product(_x, _gx);
            var (kkt, activeCount) = NnlsResult.KktViolationOf(_b, _gx, _x, _free);

            return new NnlsResult(_x, iterations, 0, status, message, kkt, activeCount)
            {
                Method = NnlsMethod.Dense,
                Products = _products,
                Tolerance = _tol,
            };
        }

        /// <summary>Phase 1: scaled projected-gradient steps until the set of bound entries settles or progress slows.</summary>
        private void ProjectedGradientSteps()
        {
            var n = _n;
            var (x, g, p, gp) = (_x, _g, _p, _gp);
            var maxDecrease = 0.0;
            for (var step = 0; step < 5; step++)
            {
                var any = false;
                for (var j = 0; j < n; j++)
                {
                    var v = -g[j] * _inv[j];
                    if (!_free[j] && x[j] <= 0 && v < 0) v = 0;
                    p[j] = v;
                    any |= v != 0;
                }

                if (!any) break;
                Product(p, gp);
                double pgp = 0, slope = 0;
                for (var j = 0; j < n; j++)
                {
                    pgp += p[j] * gp[j];
                    slope += g[j] * p[j];
                }

                if (!(slope < 0)) break;
                var alpha = pgp > 0 ? -slope / pgp : 1;
                var before = _q;
                if (!ProjectedSearch(p, alpha)) break;
                var decrease = before - _q;
                var changed = false;
                for (var j = 0; j < n; j++)
                {
                    var bound = !_free[j] && x[j] <= 0 && g[j] > 0;
                    if (bound != _binding[j]) changed = true;
                    _binding[j] = bound;
                }

                if (!changed || decrease <= 0.1 * maxDecrease) break;
                maxDecrease = Math.Max(maxDecrease, decrease);
            }
        }

        /// <summary>Phase 2: preconditioned conjugate gradients on the face of positive (and free) entries, then a projected
        /// search along the result.</summary>
        private void FaceConjugateGradients()
        {
            var n = _n;
            var (r, z, p, gp, dir, inFace) = (_r, _z, _p, _gp, _dir, _inFace);
            var faceSize = 0;
            for (var j = 0; j < n; j++)
            {
                inFace[j] = _free[j] || _x[j] > 0;
                if (inFace[j]) faceSize++;
                dir[j] = 0;
                r[j] = inFace[j] ? -_g[j] : 0;
            }

            ApplyPreconditioner();
            Array.Copy(z, p, n);
            if (faceSize == 0) return;
            var rz = 0.0;
            for (var j = 0; j < n; j++) rz += r[j] * z[j];
            var best = 0.0;
            for (var k = 0; k < _options.MaxCgSteps && rz > 0 && _products < _options.MaxProducts; k++)
            {
                Product(p, gp);
                var pAp = 0.0;
                for (var j = 0; j < n; j++)
                {
                    if (!inFace[j]) gp[j] = 0;
                    pAp += p[j] * gp[j];
                }

                if (!(pAp > 0)) break;
                var a = rz / pAp;
                var rNorm = 0.0;
                for (var j = 0; j < n; j++)
                {
                    dir[j] += a * p[j];
                    r[j] -= a * gp[j];
                    rNorm = Math.Max(rNorm, Math.Abs(r[j]));
                }

                var decrease = 0.5 * a * rz;
                best = Math.Max(best, decrease);
                if (rNorm <= 0.1 * _tol || decrease <= CgStop * best) break;
                ApplyPreconditioner();
                var rzNew = 0.0;
                for (var j = 0; j < n; j++) rzNew += r[j] * z[j];

                var beta = rzNew / rz;
                rz = rzNew;
                for (var j = 0; j < n; j++) p[j] = z[j] + beta * p[j];
            }

            ProjectedSearch(dir, 1);
        }

        /// <summary>z = P r on the face (Jacobi scaling when the equations bring no preconditioner).</summary>
        private void ApplyPreconditioner()
        {
            if (_pre is null)
            {
                for (var j = 0; j < _n; j++) _z[j] = _r[j] * _inv[j];
                return;
            }

            _pre.Precondition(_r, _z);
            for (var j = 0; j < _n; j++) if (!_inFace[j]) _z[j] = 0;
        }

        /// <summary>Projected search along d from x: xt = P(x + α d), Armijo on the objective; accepts into x, gx, g, q.</summary>
        private bool ProjectedSearch(double[] d, double alpha)
        {
            var n = _n;
            var (x, g, xt, gxt, b) = (_x, _g, _xt, _gxt, _b);
            for (var trial = 0; trial < 40; trial++)
            {
                var slope = 0.0;
                for (var j = 0; j < n; j++)
                {
                    var v = x[j] + alpha * d[j];
                    if (!_free[j] && v < 0) v = 0;
                    xt[j] = v;
                    slope += g[j] * (v - x[j]);
                }

                if (!(slope < 0)) return false;
                Product(xt, gxt);
                // the change of a quadratic is exactly ½ (g(x) + g(x + Δ))ᵀ Δ: no cancellation between two large objectives
                var change = 0.0;
                for (var j = 0; j < n; j++) change += 0.5 * (g[j] + gxt[j] - b[j]) * (xt[j] - x[j]);
                if (!double.IsFinite(change)) return false;
                if (change <= Armijo * slope)
                {
                    Array.Copy(xt, x, n);
                    Array.Copy(gxt, _gx, n);
                    for (var j = 0; j < n; j++) g[j] = _gx[j] - b[j];
                    _q += change;
                    _moved = true;
                    return true;
                }

                alpha *= 0.5;
            }

            return false;
        }
    }
}
