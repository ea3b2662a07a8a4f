namespace OrderUnfold.Inversion;

/// <summary>
/// NNLS for dense support with a strong preconditioner: a projected Newton method for ½ xᵀGx − bᵀx subject to x ≥ 0 on
/// the constrained entries (D. P. Bertsekas, "Projected Newton methods for optimization problems with simple
/// constraints", SIAM J. Control Optim. 20, 221–246, 1982), the Newton step computed inexactly by preconditioned
/// conjugate gradients on the matrix-free G (a truncated Newton method).
/// <para>
/// Each iteration: the binding set B holds the constrained entries at zero whose gradient is positive (they would leave
/// the feasible set); on the other entries the Newton direction d = −G_FF⁻¹ g_F is solved by conjugate gradients with the
/// preconditioner restricted to them, to a relative residual <see cref="Forcing"/> (tighter near the end); then a
/// projected search x(α) = P(x + α d) from α = 1 with a non-monotone Armijo test on the exact change of the quadratic
/// (against the largest of the last <see cref="SearchMemory"/> objectives). The first step, from which the bounds are
/// ignored, instead keeps the best projection of the conjugate-gradient iterates of the unconstrained system. The projection
/// fixes many entries at once and the next iteration's gradient releases those that should not stay at zero, so the
/// set of zero entries settles in a few iterations; once it is right a single Newton step on the face is exact. With a
/// preconditioner that keeps the conjugate-gradient runs short (<see cref="ToeplitzPreconditioner"/>), each iteration
/// costs tens of products G x, each O(n + M log M).
/// </para>
/// It stops when the KKT conditions hold within the tolerance, or at the product budget with an honest status.
/// </summary>
public static class ProjectedNewtonNnls
{
    /// <summary>Relative residual at which a Newton direction's conjugate-gradient run stops (common practice for truncated
    /// Newton methods: a fixed small forcing term, since the final face solve must be accurate anyway).</summary>
    public const double Forcing = 1e-3;

    private const double Armijo = 1e-4;

    /// <summary>The projected search compares with the largest objective of the last this many iterates (a non-monotone
    /// Armijo test, L. Grippo, F. Lampariello &amp; S. Lucidi, "A nonmonotone line search technique for Newton's method",
    /// SIAM J. Numer. Anal. 23, 707–716, 1986, whose experiments use 10).</summary>
    private const int SearchMemory = 10;

    /// <summary>Most conjugate-gradient steps per Newton direction while the bound set is too large for the exact face
    /// preconditioner: the stray eigenvalues of the plain restriction make long runs slow, and a rough direction serves
    /// while the bound set is still changing.</summary>
    private const int RestrictedCgSteps = 50;

    /// <summary>Bertsekas' projected Newton method with conjugate-gradient directions preconditioned by <paramref name="pre"/> (named <paramref name="preconditionerName"/> in the result's message), from <paramref name="start"/> when given;
    /// a cancelled <paramref name="cancellationToken"/> stops it before its next iteration (<see cref="OperationCanceledException"/>).</summary>
    public static NnlsResult Solve(INormalEquations eq, INormalPreconditioner pre, DenseNnls.Options options, ReadOnlySpan<double> start,
        string preconditionerName, CancellationToken cancellationToken = default) =>
        new Run(eq, pre, options, start).Solve(preconditionerName, cancellationToken);


    /// <summary>Deletes row and column k from the lower Cholesky factor L (row-major, row stride
    /// <paramref name="stride"/>, size m → m − 1): the rows after k lose column k, and the trailing block takes the
    /// deleted column's part l by the rank-one update L₂₂L₂₂ᵀ + l lᵀ with plane rotations.</summary>
    public static void DeleteFromFactor(double[] l, int stride, int m, int k, double[] work)
    {
        var len = m - k - 1;
        for (var i = 0; i < len; i++) work[i] = l[(k + 1 + i) * stride + k];
        for (var i = k + 1; i < m; i++)
        {
            var src = i * stride;
            var dst = (i - 1) * stride;
            if (k > 0) Array.Copy(l, src, l, dst, k);
            Array.Copy(l, src + k + 1, l, dst + k, i - k);
        }

        for (var q = 0; q < len; q++)
        {
            var qq = (k + q) * stride + k + q;
            var lqq = l[qq];
            var w = work[q];
            var rr = Math.Sqrt(lqq * lqq + w * w);
            var c = rr / lqq;
            var sn = w / lqq;
            l[qq] = rr;
            for (var i = q + 1; i < len; i++)
            {
                var idx = (k + i) * stride + k + q;
                var v = (l[idx] + sn * work[i]) / c;
                work[i] = c * work[i] - sn * v;
                l[idx] = v;
            }
        }
    }

    /// <summary>One projected Newton solve: the iterate with its product and gradient, the bound set, the work vectors
    /// and the counters, with one method per stage of an iteration (bound set, Newton direction, safeguard, first step
    /// along the conjugate-gradient path, projected Armijo search) and the final KKT check.</summary>
    private sealed class Run
    {
        private readonly INormalEquations _eq;
        private readonly INormalPreconditioner _pre;
        private readonly DenseNnls.Options _options;
        private readonly int _n;
        private readonly double[] _b;
        private readonly bool[] _free;
        private readonly double _tol;
        private readonly double[] _g;
        private readonly bool[] _bound;
        private readonly double[] _d, _r, _z, _p, _gp;
        private readonly FacePreconditioner _face;
        // the first direction's conjugate-gradient iterates, for the search along that path
        private readonly List<double[]> _path = [];
        // objectives of the last iterates relative to the start (exact changes of the quadratic summed up)
        private readonly Queue<double> _recent = new();
        private double[] _x, _gx, _xt, _gxt;
        private double _objective;
        private int _products, _iterations, _cgSteps, _stalls, _safeguards;

        public Run(INormalEquations eq, INormalPreconditioner pre, DenseNnls.Options options, ReadOnlySpan<double> start)
        {
            _eq = eq;
            _pre = pre;
            _options = options;
            var n = _n = eq.Count;
            _b = eq.RightHandSide.ToArray();
            _free = new bool[n];
            for (var j = 0; j < n; j++) _free[j] = eq.IsFree(j);
            _x = StartingPoint(start);
            _gx = new double[n];
            _g = new double[n];
            Product(_x, _gx);
            for (var j = 0; j < n; j++) _g[j] = _gx[j] - _b[j];
            var bMax = 0.0;
            for (var j = 0; j < n; j++) bMax = Math.Max(bMax, Math.Abs(_b[j]));
            _tol = Math.Max(options.Tolerance, options.RelativeTolerance * bMax);
            _bound = new bool[n];
            _d = new double[n];
            _r = new double[n];
            _z = new double[n];
            _p = new double[n];
            _gp = new double[n];
            _xt = new double[n];
            _gxt = new double[n];
            _objective = 0.0;
            _recent.Enqueue(_objective);
            _face = new FacePreconditioner(pre, n);
        }

        private double[] StartingPoint(ReadOnlySpan<double> start)
        {
            var n = _n;
            var x = new double[n];
            if (start.Length == n)
                for (var j = 0; j < n; j++) x[j] = _free[j] ? start[j] : Math.Max(0, start[j]);

            else
            {
                // cold start: the free entries (backgrounds) at their own optimum with the spectrum at zero, so that the first
                // Newton system's residual is the spectrum's alone
                for (var j = 0; j < n; j++)
                {
                    if (!_free[j]) continue;
                    _eq.Column(j, [], Span<double>.Empty, out var diagonal);
                    if (diagonal > 0) x[j] = _b[j] / diagonal;
                }
            }

            return x;
        }

        private void Product(double[] v, double[] result)
        {
            _eq.Multiply(v, result);
            _products++;
        }

        // g = Gx − b is kept with gx, so the violation is the one every solver's final check uses
        private double Violation() => NnlsResult.KktViolationOf(_b, _gx, _x, _free).Violation;

        public NnlsResult Solve(string preconditionerName, CancellationToken cancellationToken)
        {
            SolverStatus status;
            string message;
            while (true)
            {
                cancellationToken.ThrowIfCancellationRequested();
                var violation = Violation();
                if (DenseNnls.StopsBeforeIteration(double.IsFinite(violation), violation, _tol, _iterations, _products, _options,
                        out status, out message)) break;
                _iterations++;
                var rMax = SetBoundAndResidual();
                _face.SetBound(_bound, plain: _stalls > 0);
                if (rMax > 0) NewtonDirection();
                SafeguardDownhill();
                var moved = FirstStepAlongPath();
                _path.Clear();
                if (!moved) moved = ProjectedSearch();
                if (!moved)
                {
                    if (++_stalls >= 3)
                    {
                        (status, message) = DenseNnls.StalledVerdict(Violation(), _tol, _iterations);
                        break;
                    }
                }
                else
                {
                    _stalls = 0;
                }
            }

            return Finish(status, message, preconditionerName);
        }

        /// <summary>The binding set and the right-hand side of the face's Newton system (d cleared); returns max |r|.</summary>
        private double SetBoundAndResidual()
        {
            var rMax = 0.0;
            for (var j = 0; j < _n; j++)
            {
                // the first step ignores the bounds (an unconstrained Newton step, projected by the search): from a cold
                // start every entry is at zero and the binding set would be every bin with a positive gradient
                _bound[j] = _iterations > 1 && !_free[j] && _x[j] <= 0 && _g[j] > 0;
                _r[j] = _bound[j] ? 0 : -_g[j];
                rMax = Math.Max(rMax, Math.Abs(_r[j]));
                _d[j] = 0;
            }

            return rMax;
        }

        private void PreconditionOnFace()
        {
            _face.Apply(_r, _z);
            for (var j = 0; j < _n; j++) if (_bound[j]) _z[j] = 0;
        }

        /// <summary>Preconditioned conjugate gradients on G_FF d = −g_F (the first iteration's iterates kept on the path).</summary>
        private void NewtonDirection()
        {
            var n = _n;
            var (d, r, z, p, gp, bound) = (_d, _r, _z, _p, _gp, _bound);
            var stop = 0.1 * _tol;
            PreconditionOnFace();
            Array.Copy(z, p, n);
            var rz = 0.0;
            for (var j = 0; j < n; j++) rz += r[j] * z[j];
            var rz0 = rz;
            var maxSteps = _face.Exact ? _options.MaxCgSteps : Math.Min(_options.MaxCgSteps, RestrictedCgSteps);
            for (var k = 0; k < maxSteps && rz > 0 && _products < _options.MaxProducts; k++)
            {
                Product(p, gp);
                _cgSteps++;
                var pAp = 0.0;
                for (var j = 0; j < n; j++)
                {
                    if (bound[j]) gp[j] = 0;
                    pAp += p[j] * gp[j];
                }

                if (!(pAp > 0)) break;
                var a = rz / pAp;
                var norm = 0.0;
                for (var j = 0; j < n; j++)
                {
                    d[j] += a * p[j];
                    r[j] -= a * gp[j];
                    norm = Math.Max(norm, Math.Abs(r[j]));
                }

                if (_iterations == 1) _path.Add((double[])d.Clone());
                if (norm <= stop) break;
                PreconditionOnFace();
                var rzNew = 0.0;
                for (var j = 0; j < n; j++) rzNew += r[j] * z[j];
                if (rzNew <= Forcing * Forcing * rz0) break;
                var beta = rzNew / rz;
                rz = rzNew;
                for (var j = 0; j < n; j++) p[j] = z[j] + beta * p[j];
            }
        }

        /// <summary>
        /// A direction that is not downhill on the face (rounding in the face preconditioner's Schur complement can make it
        /// indefinite when the bound block is ill-conditioned) is replaced by the preconditioned gradient with the plain
        /// restriction, which is downhill.
        /// </summary>
        private void SafeguardDownhill()
        {
            var n = _n;
            var downhill = 0.0;
            for (var j = 0; j < n; j++) if (!_bound[j]) downhill += _g[j] * _d[j];
            if (downhill < 0) return;
            for (var j = 0; j < n; j++) _r[j] = _bound[j] ? 0 : -_g[j];
            _pre.Precondition(_r, _d);
            for (var j = 0; j < n; j++) if (_bound[j]) _d[j] = 0;
            _safeguards++;
        }

        /// <summary>
        /// The first step: the unconstrained Newton system's conjugate-gradient iterates d₁, d₂, … are tried in turn,
        /// projected, and the best of them kept (the search stops at the first that is worse than the best so far). On the
        /// broadband benchmark problems the converged unconstrained minimiser oscillates (from 8k × 2k on, 40–90 % of its
        /// bins negative), because directions the data hardly see are held only by the smoothness weight; its projection
        /// then starts the method with hundreds of bins at zero that take tens of steps to release. The early iterates
        /// carry the well-determined part of the solution and project with few zeros (4k: 32, 8k: 85, 16k: 1 instead of
        /// 32, 2 000 and 742). True when the iterate moved.
        /// </summary>
        private bool FirstStepAlongPath()
        {
            if (_path.Count <= 1) return false;
            var n = _n;
            var bestChange = 0.0;
            var bestX = new double[n];
            var bestGx = new double[n];
            var found = false;
            foreach (var step in _path)
            {
                for (var j = 0; j < n; j++)
                {
                    var v = _x[j] + step[j];
                    _xt[j] = !_free[j] && v < 0 ? 0 : v;
                }

                Product(_xt, _gxt);
                var change = QuadraticChange();
                if (!double.IsFinite(change)) break;
                if (change < bestChange)
                {
                    bestChange = change;
                    (bestX, _xt) = (_xt, bestX);
                    (bestGx, _gxt) = (_gxt, bestGx);
                    found = true;
                }
                else if (found)
                {
                    break;
                }
            }

            if (!found) return false;
            (_x, bestX) = (bestX, _x);
            (_gx, bestGx) = (bestGx, _gx);
            for (var j = 0; j < n; j++) _g[j] = _gx[j] - _b[j];
            // the memory of the non-monotone test starts here: the cold start's objective lies far above
            _objective += bestChange;
            _recent.Clear();
            _recent.Enqueue(_objective);
            return true;
        }

        /// <summary>The exact change of the quadratic from x to xt: ½ (g(x) + g(xt))ᵀ (xt − x).</summary>
        private double QuadraticChange()
        {
            var change = 0.0;
            for (var j = 0; j < _n; j++) change += 0.5 * (_g[j] + _gxt[j] - _b[j]) * (_xt[j] - _x[j]);
            return change;
        }

        /// <summary>
        /// Projected search along d: x(α) = P(x + α d), a non-monotone Armijo test on the exact change of the quadratic
        /// against the largest of the last SearchMemory objectives: with a monotone test, steps that clip a few small bins
        /// and raise the objective slightly were cut back to α = 2⁻² … 2⁻¹⁰ for tens of steps at 8k and 16k. True when the
        /// iterate moved.
        /// </summary>
        private bool ProjectedSearch()
        {
            var n = _n;
            var alpha = 1.0;
            var reference = _recent.Max();
            for (var trial = 0; trial < 40 && _products < _options.MaxProducts + 40; trial++)
            {
                var slope = 0.0;
                for (var j = 0; j < n; j++)
                {
                    var v = _x[j] + alpha * _d[j];
                    if (!_free[j] && v < 0) v = 0;
                    _xt[j] = v;
                    slope += _g[j] * (v - _x[j]);
                }

                if (double.IsNaN(slope)) break;
                // the projection can turn the step's first-order change uphill (entries that the Newton step pushes far below
                // zero); the full step is still tried, since its exact change may be a decrease, and shorter steps clip fewer
                // entries and are downhill for α small enough (Bertsekas 1982)
                if (!(slope < 0) && trial > 0)
                {
                    alpha *= 0.5;
                    continue;
                }

                Product(_xt, _gxt);
                // the change of a quadratic is exactly ½ (g(x) + g(x + Δ))ᵀ Δ
                var change = QuadraticChange();
                if (!double.IsFinite(change)) break;
                if (_objective + change < reference && _objective + change <= reference + Armijo * Math.Min(slope, 0))
                {
                    _objective += change;
                    _recent.Enqueue(_objective);
                    if (_recent.Count > SearchMemory) _recent.Dequeue();
                    (_x, _xt) = (_xt, _x);
                    (_gx, _gxt) = (_gxt, _gx);
                    for (var j = 0; j < n; j++) _g[j] = _gx[j] - _b[j];
                    return true;
                }

                alpha *= 0.5;
            }

            return false;
        }

        /// <summary>KKT check on the returned point with a fresh product (the same definition as the active-set solver).</summary>
        private NnlsResult Finish(SolverStatus status, string message, string preconditionerName)
        {
            Product(_x, _gx);
            var (kkt, activeCount) = NnlsResult.KktViolationOf(_b, _gx, _x, _free);
            if (status == SolverStatus.Converged && kkt > _tol)
            {
                status = SolverStatus.IterationLimit;
                message = $"KKT violation {kkt:G3} on the final check exceeds the tolerance {_tol:G3}";
            }

            return new NnlsResult(_x, _iterations, 0, status,
                $"{message} (projected Newton, {preconditionerName} preconditioner; {_iterations} Newton steps, {_cgSteps} conjugate-gradient steps, {_products} products G x{(_safeguards > 0 ? $", {_safeguards} gradient steps as safeguard" : "")})",
                kkt, activeCount)
            {
                Method = NnlsMethod.Dense,
                Products = _products,
                Tolerance = _tol,
            };
        }
    }
}
