namespace OrderUnfold.Inversion;

/// <summary>
/// The normal equations of a least-squares problem, given matrix-free: G = AᵀA (plus any quadratic
/// penalties) and b = Aᵀy (minus any linear penalty). Free entries are unconstrained (e.g. backgrounds).
/// </summary>
public interface INormalEquations
{
    /// <summary>Number of unknowns (grid bins, then free entries).</summary>
    int Count { get; }

    /// <summary>b = Aᵀy − λw.</summary>
    ReadOnlySpan<double> RightHandSide { get; }

    /// <summary>True when entry <paramref name="j"/> is unconstrained (e.g. a background), false when it must stay ≥ 0.</summary>
    bool IsFree(int j);

    /// <summary>G x (full vector).</summary>
    void Multiply(ReadOnlySpan<double> x, Span<double> result);

    /// <summary>Entries G[i, j] for the listed rows i, with G[j, j] last.</summary>
    void Column(int j, IReadOnlyList<int> rows, Span<double> result, out double diagonal);
}

/// <summary>Optional for <see cref="INormalEquations"/>: some rows of G x without the whole product.</summary>
public interface INormalRows
{
    /// <summary>result[r] = (G x)[rows[r]] for an x that is zero outside <paramref name="support"/>; the same values as
    /// <see cref="INormalEquations.Multiply"/> gives for those rows.</summary>
    void MultiplyRows(ReadOnlySpan<double> x, IReadOnlyList<int> support, IReadOnlyList<int> rows, Span<double> result);
}

/// <summary>
/// Lawson–Hanson active-set NNLS on the normal equations, minimising ½ xᵀGx − bᵀx subject to x ≥ 0 on the
/// constrained entries (Lawson &amp; Hanson, <i>Solving Least Squares Problems</i>, 1974, ch. 23).
/// Gradients come matrix-free from <see cref="INormalEquations.Multiply"/>; the Cholesky factor of the active
/// block is updated when a column enters (one forward solve) and downdated by Givens rotations when one
/// leaves, never refactored from scratch.
/// When the equations give single rows (<see cref="INormalRows"/>), the search for the next column looks only at a
/// working set: the entries whose gradient exceeded the tolerance at the last pass over all entries, and every entry that
/// was ever in the active set. Only when no entry of the working set violates the optimality conditions is the whole
/// gradient computed again; the solve ends only after such a whole pass finds no violation, so the result satisfies the
/// same conditions as without the working set. (With a non-negative G, which the Airy columns give, adding mass lowers
/// the gradient everywhere, so an entry below the tolerance seldom rises above it later.)
/// </summary>
public static class ActiveSetNnls
{
    /// <summary>Limits and tolerances of the active-set solver.</summary>
    public sealed record Options
    {
        /// <summary>Most outer iterations (entries added) before the solver stops with <see cref="SolverStatus.IterationLimit"/>.</summary>
        public int MaxIterations { get; init; } = 5000;

        /// <summary>Gradient tolerance for adding a column (absolute, in units of b).</summary>
        public double Tolerance { get; init; } = 1e-9;

        /// <summary>Relative ridge added to each new diagonal entry to keep the factor positive definite.</summary>
        public double Ridge { get; init; } = 1e-12;

        /// <summary>Stop (status <see cref="SolverStatus.IterationLimit"/>, <see cref="NnlsResult.HandedOver"/> set) when
        /// the active set grows past this many entries: the caller hands the problem to <see cref="DenseNnls"/>, whose cost
        /// does not grow with the support. Default: no limit.</summary>
        public int MaxActiveCount { get; init; } = int.MaxValue;

        /// <summary>Use the working set of <see cref="INormalRows"/> when the equations provide it and it holds at most this
        /// fraction of the entries (else every pass computes the whole gradient). 0 turns it off.</summary>
        public double WorkingSetFraction { get; init; } = 0.05;

        /// <summary>Use the working set only from this many entries on. Below it a pass over every entry costs little
        /// beside the rest of an iteration (on the two-sweep benchmark case, 2 × 20 000 samples, the pass over 10⁴ bins is
        /// a tenth of the 0.7 ms of an iteration, over 10⁶ bins 6 of 7 ms: docs/performance.md), while the working set can
        /// change the order in which columns enter and so the number of iterations.</summary>
        public int WorkingSetMinEntries { get; init; } = 100_000;
    }

    /// <summary>Solves from scratch, or warm-started from a previous solution <paramref name="start"/>
    /// (its positive entries form the first active set; useful when the problem changed a little). A cancelled
    /// <paramref name="cancellationToken"/> stops the solve at its next iteration with <see cref="OperationCanceledException"/>.</summary>
    public static NnlsResult Solve(INormalEquations eq, Options? options = null, ReadOnlySpan<double> start = default,
        CancellationToken cancellationToken = default)
    {
        var run = new Run(eq, options ?? new Options(), cancellationToken);
        run.Start(start);
        return run.Iterate();
    }

    /// <summary>The state of one solve: the iterate, the active set with its Cholesky factor, the entries blocked as
    /// numerically dependent, and the working set of rows looked at between whole passes.</summary>
    private sealed class Run
    {
        private readonly INormalEquations _eq;
        private readonly Options _options;
        private readonly CancellationToken _cancellationToken;
        private readonly int _n;
        private readonly double[] _b;
        private readonly double[] _x;
        private readonly bool[] _inSet;
        private readonly List<int> _active = [];
        private readonly IncrementalCholesky _chol = new();
        private readonly bool[] _blocked;
        private readonly bool[] _free; // IsFree once, not once per entry and iteration
        private readonly double[] _gx;
        private readonly double[] _column;
        private readonly INormalRows? _rowProduct;
        private readonly bool[] _everActive;
        private readonly int[] _histogram = new int[256];
        private int _removals;
        private List<int>? _working; // rows looked at between whole passes; null: the next pass is a whole one
        private double[] _workingGx = [];
        private double _floor; // the working set held every violator down to this gradient

        public Run(INormalEquations eq, Options options, CancellationToken cancellationToken)
        {
            _eq = eq;
            _options = options;
            _cancellationToken = cancellationToken;
            _n = eq.Count;
            _b = eq.RightHandSide.ToArray();
            _x = new double[_n];
            _inSet = new bool[_n];
            _blocked = new bool[_n];
            _free = new bool[_n];
            for (var j = 0; j < _n; j++) _free[j] = eq.IsFree(j);
            _gx = new double[_n];
            _column = new double[_n + 1];
            _everActive = new bool[_n];
            _floor = options.Tolerance;
            _rowProduct = options.WorkingSetFraction > 0 && _n >= options.WorkingSetMinEntries ? eq as INormalRows : null;
        }

        /// <summary>Free entries first, then the warm-start set, made feasible.</summary>
        public void Start(ReadOnlySpan<double> start)
        {
            for (var j = 0; j < _n; j++)
                if (_eq.IsFree(j)) TryAdd(j);
            if (start.Length == _n)
            {
                for (var j = 0; j < _n; j++)
                {
                    if (_eq.IsFree(j) || !(start[j] > 0)) continue;
                    if (TryAdd(j)) _x[j] = start[j];
                }
            }

            if (_active.Count > 0) MakeFeasible();
            foreach (var j in _active) _everActive[j] = true;
        }

        /// <summary>Lawson–Hanson's outer loop: the entry with the largest positive gradient enters, then the iterate is
        /// made feasible again; until no gradient is above the tolerance, or a limit is reached.</summary>
        public NnlsResult Iterate()
        {
            var iterations = 0;
            var status = SolverStatus.IterationLimit;
            var message = "";
            var handedOver = false;
            while (iterations < _options.MaxIterations)
            {
                _cancellationToken.ThrowIfCancellationRequested();
                var bestValue = _options.Tolerance;
                int best;
                if (_working is null)
                {
                    best = WholePass(ref bestValue);
                }
                else
                {
                    best = WorkingPass(ref bestValue);
                    if ((best < 0 || bestValue < _floor) && double.IsFinite(bestValue))
                    {
                        // nothing left in the working set above the level it was cut at: look at every entry again
                        _working = null;
                        continue;
                    }
                }

                if (!double.IsFinite(bestValue))
                {
                    status = SolverStatus.InvalidValues;
                    message = "gradient has non-finite values";
                    break;
                }

                if (best < 0)
                {
                    status = SolverStatus.Converged;
                    message = "KKT conditions hold";
                    break;
                }

                if (_active.Count >= _options.MaxActiveCount)
                {
                    handedOver = true;
                    message = $"active set passed {_options.MaxActiveCount} entries";
                    break;
                }

                iterations++;
                _everActive[best] = true;
                if (!TryAdd(best))
                {
                    _blocked[best] = true; // numerically dependent on the active columns
                    continue;
                }

                Array.Clear(_blocked);
                MakeFeasible();
            }

            if (status == SolverStatus.IterationLimit && !handedOver) message = $"stopped after {iterations} iterations (limit {_options.MaxIterations})";
            return Finish(iterations, status, message, handedOver);
        }

        /// <summary>The whole gradient: the entry with the largest violation, and (with row products) a new working set.</summary>
        private int WholePass(ref double bestValue)
        {
            var best = -1;
            _eq.Multiply(_x, _gx);
            for (var j = 0; j < _n; j++)
            {
                if (_inSet[j] || _blocked[j] || _free[j]) continue;
                var g = _b[j] - _gx[j];
                if (g > bestValue)
                {
                    bestValue = g;
                    best = j;
                }
            }

            if (_rowProduct is not null && best >= 0 && double.IsFinite(bestValue)) BuildWorkingSet(bestValue);
            return best;
        }

        private static int Octave(double g) => (int)(BitConverter.DoubleToInt64Bits(g) >> 50);

        /// <summary>The largest violators, about `limit` of them, in quarter-octave steps below the largest (the exponent and
        /// the two leading mantissa bits of a positive double grow with its value), plus every entry that was ever active.</summary>
        private void BuildWorkingSet(double bestValue)
        {
            var tolerance = _options.Tolerance;
            var limit = Math.Max(256, (int)(_options.WorkingSetFraction * _n));
            var bestKey = Octave(bestValue);
            Array.Clear(_histogram);
            for (var j = 0; j < _n; j++)
            {
                if (_inSet[j] || _blocked[j] || _free[j]) continue;
                var g = _b[j] - _gx[j];
                if (g > tolerance) _histogram[Math.Clamp(bestKey - Octave(g), 0, _histogram.Length - 1)]++;
            }

            var depth = 0;
            var total = _histogram[0];
            while (depth + 1 < _histogram.Length && total + _histogram[depth + 1] <= limit) total += _histogram[++depth];
            var all = depth == _histogram.Length - 1 || _histogram.AsSpan(depth + 1).IndexOfAnyExcept(0) < 0;
            _floor = all ? tolerance : Math.Max(tolerance, BitConverter.Int64BitsToDouble((long)(bestKey - depth) << 50));
            _working = [];
            for (var j = 0; j < _n; j++)
                if (!_free[j] && (_everActive[j] || _b[j] - _gx[j] >= _floor && _b[j] - _gx[j] > tolerance)) _working.Add(j);
            if (_workingGx.Length < _working.Count) _workingGx = new double[Math.Max(_working.Count, 2 * _workingGx.Length)];
        }

        /// <summary>The gradient on the working set's rows only: the entry with the largest violation among them.</summary>
        private int WorkingPass(ref double bestValue)
        {
            var working = _working!;
            var best = -1;
            _rowProduct!.MultiplyRows(_x, _active, working, _workingGx);
            for (var r = 0; r < working.Count; r++)
            {
                var j = working[r];
                if (_inSet[j] || _blocked[j]) continue;
                var g = _b[j] - _workingGx[r];
                if (g > bestValue)
                {
                    bestValue = g;
                    best = j;
                }
            }

            return best;
        }

        private bool TryAdd(int j)
        {
            var col = _column.AsSpan(0, _active.Count);
            _eq.Column(j, _active, col, out var d);
            if (!_chol.TryAdd(col, d * (1 + _options.Ridge) + 1e-300)) return false;
            _active.Add(j);
            _inSet[j] = true;
            return true;
        }

        private void RemoveAt(int position)
        {
            var j = _active[position];
            _chol.Remove(position);
            _active.RemoveAt(position);
            _inSet[j] = false;
            _x[j] = 0;
            _removals++;
        }

        private double[] SolveActive()
        {
            var rhs = new double[_active.Count];
            for (var k = 0; k < _active.Count; k++) rhs[k] = _b[_active[k]];
            return _chol.Solve(rhs);
        }

        /// <summary>Lawson–Hanson's inner loop: step towards the unconstrained solution on the active set as far as
        /// feasibility allows, drop the entries that reach zero, repeat until the solution is feasible.</summary>
        private void MakeFeasible()
        {
            for (var inner = 0; inner < 10 * _n + 10; inner++)
            {
                var z = SolveActive();
                var alpha = double.PositiveInfinity;
                for (var k = 0; k < _active.Count; k++)
                {
                    var j = _active[k];
                    if (_eq.IsFree(j) || z[k] > 0) continue;
                    var denom = _x[j] - z[k];
                    var a = denom > 0 ? _x[j] / denom : 0;
                    if (a < alpha) alpha = a;
                }

                if (double.IsPositiveInfinity(alpha))
                {
                    for (var k = 0; k < _active.Count; k++) _x[_active[k]] = z[k];
                    return;
                }

                for (var k = 0; k < _active.Count; k++)
                {
                    var j = _active[k];
                    _x[j] += alpha * (z[k] - _x[j]);
                }

                for (var k = _active.Count - 1; k >= 0; k--)
                {
                    var j = _active[k];
                    if (!_eq.IsFree(j) && _x[j] <= 1e-14 * (Math.Abs(z[k]) + 1e-300))
                        RemoveAt(k);
                    else if (!_eq.IsFree(j) && _x[j] <= 0)
                        RemoveAt(k);
                }
            }
        }

        /// <summary>The KKT check with a fresh product, and the result.</summary>
        private NnlsResult Finish(int iterations, SolverStatus status, string message, bool handedOver)
        {
            _eq.Multiply(_x, _gx);
            var violation = 0.0;
            var activeCount = 0;
            for (var j = 0; j < _n; j++)
            {
                var g = _b[j] - _gx[j];
                if (_eq.IsFree(j) || _x[j] > 0)
                {
                    activeCount++;
                    violation = Math.Max(violation, Math.Abs(g));
                }
                else
                {
                    violation = Math.Max(violation, Math.Max(0, g));
                }
            }

            return new NnlsResult(_x, iterations, _removals, status, message, violation, activeCount) { HandedOver = handedOver, Tolerance = _options.Tolerance };
        }
    }
}

/// <summary>Cholesky factor L (GP = L Lᵀ) of a growing/shrinking symmetric positive definite matrix.</summary>
public sealed class IncrementalCholesky
{
    private readonly List<double[]> _rows = []; // row i has i+1 entries

    /// <summary>Size of the factored matrix (the number of active entries).</summary>
    public int Size => _rows.Count;

    /// <summary>Appends a row/column with off-diagonal entries g (against existing) and diagonal d.</summary>
    public bool TryAdd(ReadOnlySpan<double> g, double d)
    {
        var p = _rows.Count;
        var row = new double[p + 1];
        var sum = 0.0;
        for (var i = 0; i < p; i++)
        {
            var r = _rows[i];
            var v = g[i];
            for (var k = 0; k < i; k++) v -= r[k] * row[k];
            v /= r[i];
            row[i] = v;
            sum += v * v;
        }

        var dd = d - sum;
        if (!(dd > 1e-12 * Math.Abs(d)) || !double.IsFinite(dd)) return false;
        row[p] = Math.Sqrt(dd);
        _rows.Add(row);
        return true;
    }

    /// <summary>Deletes row/column q and restores the triangular form with Givens rotations.</summary>
    public void Remove(int q)
    {
        _rows.RemoveAt(q);
        // rows q.. now have one extra entry beyond the diagonal (column i+1); rotate columns (i, i+1)
        for (var i = q; i < _rows.Count; i++)
        {
            var r = _rows[i];
            var a = r[i];
            var bb = r[i + 1];
            var h = Math.Sqrt(a * a + bb * bb);
            var c = a / h;
            var s = bb / h;
            for (var k = i; k < _rows.Count; k++)
            {
                var rk = _rows[k];
                var u = rk[i];
                var v = rk[i + 1];
                rk[i] = c * u + s * v;
                rk[i + 1] = -s * u + c * v;
            }

            // row i now ends at column i; shrink
            var shrunk = new double[i + 1];
            Array.Copy(r, shrunk, i + 1);
            if (shrunk[i] < 0)
            {
                // keep a positive diagonal: flip the sign of column i in this and later rows
                for (var k = i; k < _rows.Count; k++) _rows[k][i] = -_rows[k][i];
                shrunk[i] = -shrunk[i];
            }

            _rows[i] = shrunk;
        }
    }

    /// <summary>Solves L Lᵀ z = rhs.</summary>
    public double[] Solve(double[] rhs)
    {
        var p = _rows.Count;
        var y = new double[p];
        for (var i = 0; i < p; i++)
        {
            var r = _rows[i];
            var v = rhs[i];
            for (var k = 0; k < i; k++) v -= r[k] * y[k];
            y[i] = v / r[i];
        }

        var z = new double[p];
        for (var i = p - 1; i >= 0; i--)
        {
            var v = y[i];
            for (var k = i + 1; k < p; k++) v -= _rows[k][i] * z[k];
            z[i] = v / _rows[i][i];
        }

        return z;
    }
}
