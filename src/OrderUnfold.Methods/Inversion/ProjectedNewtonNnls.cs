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

    /// <summary>Bertsekas' projected Newton method with conjugate-gradient directions preconditioned by <paramref name="pre"/> (named <paramref name="preconditionerName"/> in the result's message), from <paramref name="start"/> when given.</summary>
    public static NnlsResult Solve(INormalEquations eq, INormalPreconditioner pre, DenseNnls.Options options, ReadOnlySpan<double> start,
        string preconditionerName)
    {
        var n = eq.Count;
        var b = eq.RightHandSide.ToArray();
        var free = new bool[n];
        for (var j = 0; j < n; j++) free[j] = eq.IsFree(j);
        var x = new double[n];
        if (start.Length == n)
            for (var j = 0; j < n; j++) x[j] = free[j] ? start[j] : Math.Max(0, start[j]);

        else
        {
            // cold start: the free entries (backgrounds) at their own optimum with the spectrum at zero, so that the first
            // Newton system's residual is the spectrum's alone
            for (var j = 0; j < n; j++)
            {
                if (!free[j]) continue;
                eq.Column(j, [], Span<double>.Empty, out var diagonal);
                if (diagonal > 0) x[j] = b[j] / diagonal;
            }
        }

        var products = 0;
        void Product(double[] v, double[] result)
        {
            eq.Multiply(v, result);
            products++;
        }

        var gx = new double[n];
        var g = new double[n];
        Product(x, gx);
        for (var j = 0; j < n; j++) g[j] = gx[j] - b[j];
        var bMax = 0.0;
        for (var j = 0; j < n; j++) bMax = Math.Max(bMax, Math.Abs(b[j]));
        var tol = Math.Max(options.Tolerance, options.RelativeTolerance * bMax);

        var bound = new bool[n];
        var d = new double[n];
        var r = new double[n];
        var z = new double[n];
        var p = new double[n];
        var gp = new double[n];
        var xt = new double[n];
        var gxt = new double[n];
        // the first direction's conjugate-gradient iterates, for the search along that path
        var path = new List<double[]>();
        // objectives of the last iterates relative to the start (exact changes of the quadratic summed up)
        var objective = 0.0;
        var recent = new Queue<double>();
        recent.Enqueue(objective);

        // g = Gx − b is kept with gx, so the violation is the one every solver's final check uses
        double Violation() => NnlsResult.KktViolationOf(b, gx, x, free).Violation;

        var face = new FacePreconditioner(pre, n);
        var status = SolverStatus.IterationLimit;
        var message = "";
        var iterations = 0;
        var cgSteps = 0;
        var stalls = 0;
        var safeguards = 0;
        while (true)
        {
            var violation = Violation();
            if (!double.IsFinite(violation))
            {
                status = SolverStatus.InvalidValues;
                message = "gradient has non-finite values";
                break;
            }

            if (violation <= tol)
            {
                status = SolverStatus.Converged;
                message = "KKT conditions hold";
                break;
            }

            if (iterations >= options.MaxIterations || products >= options.MaxProducts)
            {
                message = $"stopped after {iterations} iterations and {products} products G x (limits {options.MaxIterations}, {options.MaxProducts}); KKT violation {violation:G3} > tolerance {tol:G3}";
                break;
            }

            iterations++;

            // binding set and the right-hand side of the face's Newton system
            var rMax = 0.0;
            for (var j = 0; j < n; j++)
            {
                // the first step ignores the bounds (an unconstrained Newton step, projected by the search): from a cold
                // start every entry is at zero and the binding set would be every bin with a positive gradient
                bound[j] = iterations > 1 && !free[j] && x[j] <= 0 && g[j] > 0;
                r[j] = bound[j] ? 0 : -g[j];
                rMax = Math.Max(rMax, Math.Abs(r[j]));
                d[j] = 0;
            }

            // preconditioned conjugate gradients on G_FF d = −g_F
            var stop = 0.1 * tol;
            face.SetBound(bound, plain: stalls > 0);
            void Precondition()
            {
                face.Apply(r, z);
                for (var j = 0; j < n; j++) if (bound[j]) z[j] = 0;
            }

            if (rMax > 0)
            {
                Precondition();
                Array.Copy(z, p, n);
                var rz = 0.0;
                for (var j = 0; j < n; j++) rz += r[j] * z[j];
                var rz0 = rz;
                var maxSteps = face.Exact ? options.MaxCgSteps : Math.Min(options.MaxCgSteps, RestrictedCgSteps);
                for (var k = 0; k < maxSteps && rz > 0 && products < options.MaxProducts; k++)
                {
                    Product(p, gp);
                    cgSteps++;
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

                    if (iterations == 1) path.Add((double[])d.Clone());
                    if (norm <= stop) break;
                    Precondition();
                    var rzNew = 0.0;
                    for (var j = 0; j < n; j++) rzNew += r[j] * z[j];
                    if (rzNew <= Forcing * Forcing * rz0) break;
                    var beta = rzNew / rz;
                    rz = rzNew;
                    for (var j = 0; j < n; j++) p[j] = z[j] + beta * p[j];
                }
            }

            // safeguard: a direction that is not downhill on the face (rounding in the face preconditioner's Schur
            // complement can make it indefinite when the bound block is ill-conditioned) is replaced by the preconditioned
            // gradient with the plain restriction, which is downhill
            var downhill = 0.0;
            for (var j = 0; j < n; j++) if (!bound[j]) downhill += g[j] * d[j];
            if (!(downhill < 0))
            {
                for (var j = 0; j < n; j++) r[j] = bound[j] ? 0 : -g[j];
                pre.Precondition(r, d);
                for (var j = 0; j < n; j++) if (bound[j]) d[j] = 0;
                safeguards++;
            }

            // The first step: the unconstrained Newton system's conjugate-gradient iterates d₁, d₂, … are tried in turn,
            // projected, and the best of them kept (the search stops at the first that is worse than the best so far). On the
            // broadband benchmark problems the converged unconstrained minimiser oscillates (from 8k × 2k on, 40–90 % of its
            // bins negative), because directions the data hardly see are held only by the smoothness weight; its projection
            // then starts the method with hundreds of bins at zero that take tens of steps to release. The early iterates
            // carry the well-determined part of the solution and project with few zeros (4k: 32, 8k: 85, 16k: 1 instead of
            // 32, 2 000 and 742).
            var moved = false;
            if (path.Count > 1)
            {
                var bestChange = 0.0;
                var bestX = new double[n];
                var bestGx = new double[n];
                var found = false;
                foreach (var step in path)
                {
                    for (var j = 0; j < n; j++)
                    {
                        var v = x[j] + step[j];
                        xt[j] = !free[j] && v < 0 ? 0 : v;
                    }

                    Product(xt, gxt);
                    var change = 0.0;
                    for (var j = 0; j < n; j++) change += 0.5 * (g[j] + gxt[j] - b[j]) * (xt[j] - x[j]);
                    if (!double.IsFinite(change)) break;
                    if (change < bestChange)
                    {
                        bestChange = change;
                        (bestX, xt) = (xt, bestX);
                        (bestGx, gxt) = (gxt, bestGx);
                        found = true;
                    }
                    else if (found)
                    {
                        break;
                    }
                }

                if (found)
                {
                    (x, bestX) = (bestX, x);
                    (gx, bestGx) = (bestGx, gx);
                    for (var j = 0; j < n; j++) g[j] = gx[j] - b[j];
                    // the memory of the non-monotone test starts here: the cold start's objective lies far above
                    objective += bestChange;
                    recent.Clear();
                    recent.Enqueue(objective);
                    moved = true;
                }
            }

            path.Clear();

            // projected search along d: x(α) = P(x + α d), a non-monotone Armijo test on the exact change of the quadratic
            // against the largest of the last SearchMemory objectives: with a monotone test, steps that clip a few small
            // bins and raise the objective slightly were cut back to α = 2⁻² … 2⁻¹⁰ for tens of steps at 8k and 16k
            var alpha = 1.0;
            var reference = recent.Max();
            for (var trial = 0; trial < 40 && !moved && products < options.MaxProducts + 40; trial++)
            {
                var slope = 0.0;
                for (var j = 0; j < n; j++)
                {
                    var v = x[j] + alpha * d[j];
                    if (!free[j] && v < 0) v = 0;
                    xt[j] = v;
                    slope += g[j] * (v - x[j]);
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

                Product(xt, gxt);
                // the change of a quadratic is exactly ½ (g(x) + g(x + Δ))ᵀ Δ
                var change = 0.0;
                for (var j = 0; j < n; j++) change += 0.5 * (g[j] + gxt[j] - b[j]) * (xt[j] - x[j]);
                if (!double.IsFinite(change)) break;
                if (objective + change < reference && objective + change <= reference + Armijo * Math.Min(slope, 0))
                {
                    objective += change;
                    recent.Enqueue(objective);
                    if (recent.Count > SearchMemory) recent.Dequeue();
                    (x, xt) = (xt, x);
                    (gx, gxt) = (gxt, gx);
                    for (var j = 0; j < n; j++) g[j] = gx[j] - b[j];
                    moved = true;
                    break;
                }

                alpha *= 0.5;
            }

            if (!moved)
            {
                if (++stalls >= 3)
                {
                    var v = Violation();
                    if (v <= tol)
                    {
                        status = SolverStatus.Converged;
                        message = "KKT conditions hold";
                    }
                    else
                    {
                        message = $"no further progress after {iterations} iterations; KKT violation {v:G3} > tolerance {tol:G3}";
                    }

                    break;
                }
            }
            else
            {
                stalls = 0;
            }
        }

        // KKT check on the returned point with a fresh product (the same definition as the active-set solver)
        Product(x, gx);
        var (kkt, activeCount) = NnlsResult.KktViolationOf(b, gx, x, free);

        if (status == SolverStatus.Converged && kkt > tol)
        {
            status = SolverStatus.IterationLimit;
            message = $"KKT violation {kkt:G3} on the final check exceeds the tolerance {tol:G3}";
        }

        return new NnlsResult(x, iterations, 0, status,
            $"{message} (projected Newton, {preconditionerName} preconditioner; {iterations} Newton steps, {cgSteps} conjugate-gradient steps, {products} products G x{(safeguards > 0 ? $", {safeguards} gradient steps as safeguard" : "")})",
            kkt, activeCount)
        {
            Method = NnlsMethod.Dense,
            Products = products,
            Tolerance = tol,
        };
    }

    /// <summary>aᵀb (vectorised).</summary>
    private static double Dot(ReadOnlySpan<double> a, ReadOnlySpan<double> b)
    {
        var vectors = System.Runtime.InteropServices.MemoryMarshal.Cast<double, System.Numerics.Vector<double>>(a);
        var others = System.Runtime.InteropServices.MemoryMarshal.Cast<double, System.Numerics.Vector<double>>(b);
        var acc = System.Numerics.Vector<double>.Zero;
        for (var i = 0; i < vectors.Length; i++) acc += vectors[i] * others[i];
        var sum = System.Numerics.Vector.Sum(acc);
        for (var i = vectors.Length * System.Numerics.Vector<double>.Count; i < a.Length; i++) sum += a[i] * b[i];
        return sum;
    }

    /// <summary>y += α x.</summary>
    private static void Axpy(double alpha, ReadOnlySpan<double> x, Span<double> y)
    {
        var xs = System.Runtime.InteropServices.MemoryMarshal.Cast<double, System.Numerics.Vector<double>>(x);
        var ys = System.Runtime.InteropServices.MemoryMarshal.Cast<double, System.Numerics.Vector<double>>(y[..x.Length]);
        var va = new System.Numerics.Vector<double>(alpha);
        for (var i = 0; i < xs.Length; i++) ys[i] += va * xs[i];
        for (var i = xs.Length * System.Numerics.Vector<double>.Count; i < x.Length; i++) y[i] += alpha * x[i];
    }

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

    /// <summary>
    /// The preconditioner P ≈ G⁻¹ restricted to a face (the entries not bound at zero) without losing its quality: the
    /// inverse of the face block of P⁻¹ is P_FF − P_FB (P_BB)⁻¹ P_BF (the Schur-complement identity for a block of an
    /// inverse), so with the columns P e_b of the bound entries (one application each, kept while they stay bound) and a
    /// Cholesky factor of the small block P_BB, the face is preconditioned as well as the whole problem. Simply zeroing P's
    /// rows and columns of the bound entries instead leaves one stray eigenvalue per bound entry, which costs the
    /// conjugate gradients an iteration or more each. Used while the bound set is small (at most <see cref="MaxSet"/>
    /// entries); beyond that the plain restriction.
    /// </summary>
    private sealed class FacePreconditioner(INormalPreconditioner pre, int n)
    {
        public const int MaxSet = 1200;

        private readonly Dictionary<int, double[]> _columns = new();
        private int[] _set = [];
        private double[] _factor = [];
        private double[] _u = [];
        private double[][] _setColumns = [];
        private bool _exact;

        /// <summary>True when the face is preconditioned exactly (bound set small enough).</summary>
        public bool Exact => _exact || _set.Length == 0 && _empty;

        private bool _empty;

        /// <summary>Prepares the face of the entries not in <paramref name="bound"/>; with <paramref name="plain"/> (after a
        /// Newton step that made no progress) the plain restriction.</summary>
        public void SetBound(bool[] bound, bool plain)
        {
            // the entries in the order they became bound (those still bound from the last set first, then the new ones), so
            // that the factor's leading rows, which depend only on the entries before them, can be kept
            var set = new List<int>();
            var inSet = new HashSet<int>();
            foreach (var j in _set)
                if (bound[j] && inSet.Add(j)) set.Add(j);
            for (var j = 0; j < n; j++) if (bound[j] && inSet.Add(j)) set.Add(j);
            _empty = set.Count == 0;
            if (plain || set.Count > MaxSet || (long)set.Count * n > 1L << 23)
            {
                _exact = false;
                _set = [];
                return;
            }

            if (_exact && set.SequenceEqual(_set)) return;
            // rows of the factor depend only on the entries before them: the rows of a shared leading part are kept
            var previous = _exact ? _set : [];
            var previousFactor = _factor;
            var keep = 0;
            while (keep < previous.Length && keep < set.Count && previous[keep] == set[keep]) keep++;
            _set = set.ToArray();
            foreach (var key in _columns.Keys.Where(k => !bound[k]).ToList()) _columns.Remove(key);
            var unit = new double[n];
            foreach (var j in _set)
            {
                if (_columns.ContainsKey(j)) continue;
                var column = new double[n];
                if (pre is INormalPreconditionerColumns columns) columns.Column(j, column);
                else
                {
                    unit[j] = 1;
                    pre.Precondition(unit, column);
                    unit[j] = 0;
                }
                _columns[j] = column;
            }

            // Cholesky factor of P_BB (lower, row-major)
            var m = _set.Length;
            var mOld = previous.Length;
            // entries that left the bound set: their rows and columns are deleted from the previous factor by a rank-one
            // update of the trailing block each (Golub & Van Loan, Matrix Computations, 4th ed., §6.5.4), O((m − k)²) per
            // deleted position k, when that is cheaper than recomputing the rows after the first deleted one (O(m³ − k³))
            if (keep < mOld)
            {
                var deleteCost = 0.0;
                var kept = 0;
                for (var a = 0; a < mOld; a++)
                {
                    if (bound[previous[a]]) kept++;
                    else deleteCost += 3.0 * (mOld - a) * (mOld - a);
                }

                var recomputeCost = ((double)kept * kept * kept - (double)keep * keep * keep) / 6;
                if (kept > keep && deleteCost < recomputeCost)
                {
                    var work = new double[mOld];
                    var size = mOld;
                    for (var a = mOld - 1; a >= 0; a--)
                        if (!bound[previous[a]]) DeleteFromFactor(previousFactor, mOld, size--, a, work);
                    keep = kept;
                }
            }

            _factor = new double[m * m];
            _u = new double[m];
            for (var a = 0; a < keep; a++) Array.Copy(previousFactor, a * mOld, _factor, a * m, a + 1);
            var cols = new double[m][];
            for (var a = 0; a < m; a++) cols[a] = _columns[_set[a]];
            _setColumns = cols;
            for (var a = keep; a < m; a++)
            {
                var col = cols[a];
                var ja = _set[a];
                for (var c = 0; c <= a; c++)
                {
                    var sum = 0.5 * (col[_set[c]] + cols[c][ja])
                        - Dot(_factor.AsSpan(a * m, c), _factor.AsSpan(c * m, c));
                    if (c == a)
                    {
                        if (!(sum > 0))
                        {
                            _exact = false;
                            _set = [];
                            return;
                        }

                        _factor[a * m + a] = Math.Sqrt(sum);
                    }
                    else
                    {
                        _factor[a * m + c] = sum / _factor[c * m + c];
                    }
                }
            }

            _exact = true;
        }

        public void Apply(double[] r, double[] z)
        {
            pre.Precondition(r, z);
            if (!_exact || _set.Length == 0) return;
            var m = _set.Length;
            var u = _u;
            for (var a = 0; a < m; a++) u[a] = z[_set[a]];
            // w = P_BB⁻¹ u by the two triangular solves
            for (var a = 0; a < m; a++)
                u[a] = (u[a] - Dot(_factor.AsSpan(a * m, a), u.AsSpan(0, a))) / _factor[a * m + a];

            // the transposed solve by rows of the factor (contiguous): once u[a] is final, its part leaves the earlier ones
            for (var a = m - 1; a >= 0; a--)
            {
                u[a] /= _factor[a * m + a];
                Axpy(-u[a], _factor.AsSpan(a * m, a), u.AsSpan(0, a));
            }

            var cols = _setColumns;
            for (var a = 0; a < m; a++)
            {
                var w = u[a];
                if (w == 0) continue;
                Axpy(-w, cols[a], z);
            }
        }
    }
}
