namespace OrderUnfold.Inversion;

/// <summary>
/// The normal equations of a least-squares problem, given matrix-free: G = AᵀA (plus any quadratic
/// penalties) and b = Aᵀy (minus any linear penalty). Free entries are unconstrained (e.g. backgrounds).
/// </summary>
public interface INormalEquations
{
    int Count { get; }

    /// <summary>b = Aᵀy − λw.</summary>
    ReadOnlySpan<double> RightHandSide { get; }

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
    public sealed record Options
    {
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
    /// (its positive entries form the first active set; useful when the problem changed a little).</summary>
    public static NnlsResult Solve(INormalEquations eq, Options? options = null, ReadOnlySpan<double> start = default)
    {
        options ??= new Options();
        var n = eq.Count;
        var b = eq.RightHandSide.ToArray();
        var x = new double[n];
        var inSet = new bool[n];
        var active = new List<int>();
        var chol = new IncrementalCholesky();
        var blocked = new bool[n];
        var free = new bool[n]; // IsFree once, not once per entry and iteration
        for (var j = 0; j < n; j++) free[j] = eq.IsFree(j);
        var gx = new double[n];
        var column = new double[n + 1];
        var removals = 0;
        var handedOver = false;

        bool TryAdd(int j)
        {
            var col = column.AsSpan(0, active.Count);
            eq.Column(j, active, col, out var d);
            if (!chol.TryAdd(col, d * (1 + options.Ridge) + 1e-300)) return false;
            active.Add(j);
            inSet[j] = true;
            return true;
        }

        void RemoveAt(int position)
        {
            var j = active[position];
            chol.Remove(position);
            active.RemoveAt(position);
            inSet[j] = false;
            x[j] = 0;
            removals++;
        }

        double[] SolveActive()
        {
            var rhs = new double[active.Count];
            for (var k = 0; k < active.Count; k++) rhs[k] = b[active[k]];
            return chol.Solve(rhs);
        }

        void MakeFeasible()
        {
            for (var inner = 0; inner < 10 * n + 10; inner++)
            {
                var z = SolveActive();
                var alpha = double.PositiveInfinity;
                for (var k = 0; k < active.Count; k++)
                {
                    var j = active[k];
                    if (eq.IsFree(j) || z[k] > 0) continue;
                    var denom = x[j] - z[k];
                    var a = denom > 0 ? x[j] / denom : 0;
                    if (a < alpha) alpha = a;
                }

                if (double.IsPositiveInfinity(alpha))
                {
                    for (var k = 0; k < active.Count; k++) x[active[k]] = z[k];
                    return;
                }

                for (var k = 0; k < active.Count; k++)
                {
                    var j = active[k];
                    x[j] += alpha * (z[k] - x[j]);
                }

                for (var k = active.Count - 1; k >= 0; k--)
                {
                    var j = active[k];
                    if (!eq.IsFree(j) && x[j] <= 1e-14 * (Math.Abs(z[k]) + 1e-300))
                        RemoveAt(k);
                    else if (!eq.IsFree(j) && x[j] <= 0)
                        RemoveAt(k);
                }
            }
        }

        // free entries first, then the warm-start set
        for (var j = 0; j < n; j++)
            if (eq.IsFree(j)) TryAdd(j);
        if (start.Length == n)
        {
            for (var j = 0; j < n; j++)
            {
                if (eq.IsFree(j) || !(start[j] > 0)) continue;
                if (TryAdd(j)) x[j] = start[j];
            }
        }

        if (active.Count > 0) MakeFeasible();

        var iterations = 0;
        var status = SolverStatus.IterationLimit;
        var message = "";
        var rowProduct = options.WorkingSetFraction > 0 && n >= options.WorkingSetMinEntries ? eq as INormalRows : null;
        List<int>? working = null; // rows looked at between whole passes; null: the next pass is a whole one
        var everActive = new bool[n];
        var workingGx = Array.Empty<double>();
        var histogram = new int[256];
        var floor = options.Tolerance; // the working set held every violator down to this gradient
        static int Octave(double g) => (int)(BitConverter.DoubleToInt64Bits(g) >> 50);
        foreach (var j in active) everActive[j] = true;
        while (iterations < options.MaxIterations)
        {
            Cancellation.ThrowIfRequested(); // Ctrl-C / SIGTERM (Cancellation.cs)
            var best = -1;
            var bestValue = options.Tolerance;
            if (working is null)
            {
                eq.Multiply(x, gx);
                for (var j = 0; j < n; j++)
                {
                    if (inSet[j] || blocked[j] || free[j]) continue;
                    var g = b[j] - gx[j];
                    if (g > bestValue)
                    {
                        bestValue = g;
                        best = j;
                    }
                }

                if (rowProduct is not null && best >= 0 && double.IsFinite(bestValue))
                {
                    // the largest violators, about `limit` of them, in quarter-octave steps below the largest: the exponent and
                    // the two leading mantissa bits of a positive double grow with its value
                    var limit = Math.Max(256, (int)(options.WorkingSetFraction * n));
                    var bestKey = Octave(bestValue);
                    Array.Clear(histogram);
                    for (var j = 0; j < n; j++)
                    {
                        if (inSet[j] || blocked[j] || free[j]) continue;
                        var g = b[j] - gx[j];
                        if (g > options.Tolerance) histogram[Math.Clamp(bestKey - Octave(g), 0, histogram.Length - 1)]++;
                    }

                    var depth = 0;
                    var total = histogram[0];
                    while (depth + 1 < histogram.Length && total + histogram[depth + 1] <= limit) total += histogram[++depth];
                    var all = depth == histogram.Length - 1 || histogram.AsSpan(depth + 1).IndexOfAnyExcept(0) < 0;
                    floor = all ? options.Tolerance : Math.Max(options.Tolerance, BitConverter.Int64BitsToDouble((long)(bestKey - depth) << 50));
                    working = [];
                    for (var j = 0; j < n; j++)
                        if (!free[j] && (everActive[j] || b[j] - gx[j] >= floor && b[j] - gx[j] > options.Tolerance)) working.Add(j);
                    if (workingGx.Length < working.Count) workingGx = new double[Math.Max(working.Count, 2 * workingGx.Length)];
                }
            }
            else
            {
                rowProduct!.MultiplyRows(x, active, working, workingGx);
                for (var r = 0; r < working.Count; r++)
                {
                    var j = working[r];
                    if (inSet[j] || blocked[j]) continue;
                    var g = b[j] - workingGx[r];
                    if (g > bestValue)
                    {
                        bestValue = g;
                        best = j;
                    }
                }

                if ((best < 0 || bestValue < floor) && double.IsFinite(bestValue))
                {
                    // nothing left in the working set above the level it was cut at: look at every entry again
                    working = null;
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

            if (active.Count >= options.MaxActiveCount)
            {
                handedOver = true;
                message = $"active set passed {options.MaxActiveCount} entries";
                break;
            }

            iterations++;
            everActive[best] = true;
            if (!TryAdd(best))
            {
                blocked[best] = true; // numerically dependent on the active columns
                continue;
            }

            Array.Clear(blocked);
            MakeFeasible();
        }

        // KKT check
        eq.Multiply(x, gx);
        var violation = 0.0;
        var activeCount = 0;
        for (var j = 0; j < n; j++)
        {
            var g = b[j] - gx[j];
            if (eq.IsFree(j) || x[j] > 0)
            {
                activeCount++;
                violation = Math.Max(violation, Math.Abs(g));
            }
            else
            {
                violation = Math.Max(violation, Math.Max(0, g));
            }
        }

        if (status == SolverStatus.IterationLimit && !handedOver) message = $"stopped after {iterations} iterations (limit {options.MaxIterations})";
        return new NnlsResult(x, iterations, removals, status, message, violation, activeCount) { HandedOver = handedOver, Tolerance = options.Tolerance };
    }
}

/// <summary>Cholesky factor L (GP = L Lᵀ) of a growing/shrinking symmetric positive definite matrix.</summary>
public sealed class IncrementalCholesky
{
    private readonly List<double[]> _rows = []; // row i has i+1 entries

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
