using System.Numerics;
using System.Runtime.InteropServices;

namespace OrderUnfold.Inversion;

/// <summary>
/// The preconditioner P ≈ G⁻¹ restricted to a face (the entries not bound at zero) without losing its quality: the
/// inverse of the face block of P⁻¹ is P_FF − P_FB (P_BB)⁻¹ P_BF (the Schur-complement identity for a block of an
/// inverse), so with the columns P e_b of the bound entries (one application each, kept while they stay bound) and a
/// Cholesky factor of the small block P_BB, the face is preconditioned as well as the whole problem. Simply zeroing P's
/// rows and columns of the bound entries instead leaves one stray eigenvalue per bound entry, which costs the
/// conjugate gradients an iteration or more each. Used by <see cref="ProjectedNewtonNnls"/> while the bound set is small
/// (at most <see cref="MaxSet"/> entries); beyond that the plain restriction.
/// </summary>
internal sealed class FacePreconditioner(INormalPreconditioner pre, int n)
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
        var set = OrderedBoundSet(bound);
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
        FetchColumns(bound);
        keep = DeleteReleased(bound, previous, previousFactor, keep);
        _exact = Factor(previous.Length, previousFactor, keep);
        if (!_exact) _set = [];
    }

    /// <summary>The bound entries in the order they became bound (those still bound from the last set first, then the new
    /// ones), so that the factor's leading rows, which depend only on the entries before them, can be kept.</summary>
    private List<int> OrderedBoundSet(bool[] bound)
    {
        var set = new List<int>();
        var inSet = new HashSet<int>();
        foreach (var j in _set)
            if (bound[j] && inSet.Add(j)) set.Add(j);
        for (var j = 0; j < n; j++) if (bound[j] && inSet.Add(j)) set.Add(j);
        return set;
    }

    /// <summary>The columns P e_b of the bound set: kept ones reused, those of released entries dropped, new ones computed.</summary>
    private void FetchColumns(bool[] bound)
    {
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
    }

    /// <summary>
    /// Entries that left the bound set: their rows and columns are deleted from the previous factor by a rank-one update of
    /// the trailing block each (Golub &amp; Van Loan, Matrix Computations, 4th ed., §6.5.4), O((m − k)²) per deleted position
    /// k, when that is cheaper than recomputing the rows after the first deleted one (O(m³ − k³)). Returns the number of
    /// leading rows of the previous factor that stay valid.
    /// </summary>
    private static int DeleteReleased(bool[] bound, int[] previous, double[] previousFactor, int keep)
    {
        var mOld = previous.Length;
        if (keep >= mOld) return keep;
        var deleteCost = 0.0;
        var kept = 0;
        for (var a = 0; a < mOld; a++)
        {
            if (bound[previous[a]]) kept++;
            else deleteCost += 3.0 * (mOld - a) * (mOld - a);
        }

        var recomputeCost = ((double)kept * kept * kept - (double)keep * keep * keep) / 6;
        if (!(kept > keep && deleteCost < recomputeCost)) return keep;
        var work = new double[mOld];
        var size = mOld;
        for (var a = mOld - 1; a >= 0; a--)
            if (!bound[previous[a]]) ProjectedNewtonNnls.DeleteFromFactor(previousFactor, mOld, size--, a, work);
        return kept;
    }

    /// <summary>Cholesky factor of P_BB (lower, row-major): the first <paramref name="keep"/> rows copied from the previous
    /// factor (row stride <paramref name="mOld"/>), the others computed; false when P_BB is not numerically positive
    /// definite.</summary>
    private bool Factor(int mOld, double[] previousFactor, int keep)
    {
        var m = _set.Length;
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
                    if (!(sum > 0)) return false;
                    _factor[a * m + a] = Math.Sqrt(sum);
                }
                else
                {
                    _factor[a * m + c] = sum / _factor[c * m + c];
                }
            }
        }

        return true;
    }

    /// <summary>z = P r corrected on the face: z − P_FB (P_BB)⁻¹ z_B when the face is preconditioned exactly.</summary>
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

    /// <summary>aᵀb (vectorised).</summary>
    private static double Dot(ReadOnlySpan<double> a, ReadOnlySpan<double> b)
    {
        var vectors = MemoryMarshal.Cast<double, Vector<double>>(a);
        var others = MemoryMarshal.Cast<double, Vector<double>>(b);
        var acc = Vector<double>.Zero;
        for (var i = 0; i < vectors.Length; i++) acc += vectors[i] * others[i];
        var sum = Vector.Sum(acc);
        for (var i = vectors.Length * Vector<double>.Count; i < a.Length; i++) sum += a[i] * b[i];
        return sum;
    }

    /// <summary>y += α x.</summary>
    private static void Axpy(double alpha, ReadOnlySpan<double> x, Span<double> y)
    {
        var xs = MemoryMarshal.Cast<double, Vector<double>>(x);
        var ys = MemoryMarshal.Cast<double, Vector<double>>(y[..x.Length]);
        var va = new Vector<double>(alpha);
        for (var i = 0; i < xs.Length; i++) ys[i] += va * xs[i];
        for (var i = xs.Length * Vector<double>.Count; i < x.Length; i++) y[i] += alpha * x[i];
    }
}
