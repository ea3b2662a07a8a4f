using OrderUnfold.Instruments;

namespace OrderUnfold.Inversion;

/// <summary>
/// The joint linear problem for all sweeps at fixed offsets and gains: unknowns are the grid spectrum
/// s ≥ 0 and one free background per sweep, in noise-whitened units. Provides the normal equations
/// matrix-free to <see cref="ActiveSetNnls"/>, with an L1 weight λ on s and an optional first-difference
/// smoothness weight μ‖Ds‖².
/// </summary>
public sealed class UnfoldProblem : INormalEquations, INormalRows, INormalDiagonal, INormalPreconditioner
{
    private readonly CalibratedSweep[] _sweeps;
    private readonly SweepOperator[] _ops;
    private readonly double[] _gains;
    private readonly double[][] _kSty; // K Sᵀ(y/σ) on each periodic grid
    private readonly double[][] _kSt1; // K Sᵀ 1
    private readonly double[] _rhs;
    private readonly double _lambda;
    private readonly double _mu;
    private readonly double[][] _work1;
    private readonly double[][] _work2;
    private readonly double[][] _colCache;

    /// <summary>The problem of <paramref name="sweeps"/> on <paramref name="grid"/> at fixed origins and gains, with L1 weight λ = <paramref name="l1Weight"/> and smoothness weight μ = <paramref name="smoothness"/> (whitened units), the fold on a periodic grid of step <paramref name="periodicStepHz"/>.</summary>
    public UnfoldProblem(IReadOnlyList<CalibratedSweep> sweeps, FrequencyGrid grid, IReadOnlyList<double> offsetsHz,
        IReadOnlyList<double> gains, double l1Weight, double smoothness, double periodicStepHz)
    {
        _sweeps = sweeps.ToArray();
        Grid = grid;
        _gains = gains.ToArray();
        _lambda = l1Weight;
        _mu = smoothness;
        var k = _sweeps.Length;
        _ops = new SweepOperator[k];
        _kSty = new double[k][];
        _kSt1 = new double[k][];
        _work1 = new double[k][];
        _work2 = new double[k][];
        _colCache = new double[k][];
        _scales = new double[k];
        for (var s = 0; s < k; s++)
        {
            var sw = _sweeps[s];
            var op = new SweepOperator(sw.Instrument, sw.ScanHz, grid, offsetsHz[s], periodicStepHz);
            _ops[s] = op;
            var yw = sw.Signal.Select(v => v / sw.NoiseSigma).ToArray();
            var p = new double[op.M];
            op.SampleTranspose(yw, p);
            _kSty[s] = new double[op.M];
            op.Convolve(p, _kSty[s]);
            op.SampleTranspose(Enumerable.Repeat(1.0, sw.Signal.Length).ToArray(), p);
            _kSt1[s] = new double[op.M];
            op.Convolve(p, _kSt1[s]);
            _work1[s] = new double[op.M];
            _work2[s] = new double[op.M];
            _colCache[s] = new double[op.M];
        }

        Count = grid.Count + k;
        _rhs = new double[Count];
        for (var s = 0; s < k; s++)
        {
            var c = Scale(s);
            _ops[s].FoldTransposeAdd(_kSty[s], _rhs.AsSpan(0, grid.Count), c);
            _rhs[grid.Count + s] = _sweeps[s].Signal.Sum() / _sweeps[s].NoiseSigma;
        }

        for (var j = 0; j < grid.Count; j++) _rhs[j] -= _lambda;
    }

    /// <summary>The same problem with other L1 and smoothness weights. The sweep operators and the data terms are
    /// shared (only the right-hand side changes), so measuring column norms on an unweighted problem and then
    /// weighting it costs one set-up, not two.</summary>
    public UnfoldProblem WithPenalties(double l1Weight, double smoothness) => new(this, l1Weight, smoothness);

    private UnfoldProblem(UnfoldProblem source, double l1Weight, double smoothness)
    {
        _sweeps = source._sweeps;
        Grid = source.Grid;
        _gains = source._gains;
        _ops = source._ops;
        _kSty = source._kSty;
        _kSt1 = source._kSt1;
        _lambda = l1Weight;
        _mu = smoothness;
        Count = source.Count;
        _rhs = (double[])source._rhs.Clone();
        for (var j = 0; j < Grid.Count; j++) _rhs[j] += source._lambda - _lambda;
        _work1 = source._work1.Select(w => new double[w.Length]).ToArray();
        _work2 = source._work2.Select(w => new double[w.Length]).ToArray();
        _colCache = source._colCache.Select(w => new double[w.Length]).ToArray();
        _scales = new double[source._scales.Length];
    }

    /// <summary>The frequency grid of the spectrum.</summary>
    public FrequencyGrid Grid { get; }
    /// <summary>Number of unknowns: grid bins, then one background per sweep.</summary>
    public int Count { get; }
    /// <summary>Number of sweeps.</summary>
    public int SweepCount => _sweeps.Length;
    /// <summary>The per-sweep operators A_k.</summary>
    public IReadOnlyList<SweepOperator> Operators => _ops;
    /// <summary>b = Aᵀy − λw, whitened.</summary>
    public ReadOnlySpan<double> RightHandSide => _rhs;
    /// <summary>L1 weight λ in whitened units.</summary>
    public double L1Weight => _lambda;

    /// <summary>Smoothness weight μ in whitened units.</summary>
    public double SmoothnessWeight => _mu;

    /// <summary>Row scale of sweep s in whitened units: gain / σ.</summary>
    public double Scale(int s) => _gains[s] / _sweeps[s].NoiseSigma;

    /// <summary>The backgrounds (entries after the grid) are free; the spectrum bins are ≥ 0.</summary>
    public bool IsFree(int j) => j >= Grid.Count;

    /// <summary>G x, matrix-free (fold, convolution, sampling per sweep).</summary>
    public void Multiply(ReadOnlySpan<double> x, Span<double> result)
    {
        var n = Grid.Count;
        var s = x[..n];
        // the solver's iterates are sparse: list the nonzero bins once, fold only those (O(nonzero), not O(n) per sweep)
        _nonzero.Clear();
        for (var j = 0; j < n; j++)
            if (s[j] != 0) _nonzero.Add(j);
        PeriodicProduct(x, result[n..]);

        // Σ_k c_k · foldᵀ(w2_k), all sweeps in one pass over the grid
        SweepOperator.FoldTransposeAll(_ops, _work2, _scales, result[..n]);

        if (_mu > 0)
        {
            for (var j = 0; j < n; j++) result[j] += _mu * Difference(s, j);
        }
    }

    /// <summary>Rows of G x for x zero outside <paramref name="support"/>: the same periodic products as
    /// <see cref="Multiply"/> (O(support + M log M) per sweep), then only the listed rows are gathered, with the same sums
    /// in the same order, instead of a pass over the whole grid.</summary>
    public void MultiplyRows(ReadOnlySpan<double> x, IReadOnlyList<int> support, IReadOnlyList<int> rows, Span<double> result)
    {
        var n = Grid.Count;
        var s = x[..n];
        _nonzero.Clear();
        foreach (var j in support)
            if (j < n && s[j] != 0) _nonzero.Add(j);
        _nonzero.Sort();
        Span<double> background = stackalloc double[_sweeps.Length];
        PeriodicProduct(x, background);
        for (var r = 0; r < rows.Count; r++)
        {
            var i = rows[r];
            if (i >= n)
            {
                result[r] = background[i - n];
                continue;
            }

            var v = 0.0;
            for (var k = 0; k < _ops.Length; k++) v += _scales[k] * _ops[k].Gather(_work2[k], i);
            if (_mu > 0) v += _mu * Difference(s, i);
            result[r] = v;
        }
    }

    private static double Difference(ReadOnlySpan<double> s, int j)
    {
        var v = 0.0;
        if (j > 0) v += s[j] - s[j - 1];
        if (j < s.Length - 1) v += s[j] - s[j + 1];
        return v;
    }

    /// <summary>The periodic part of G x for the bins listed in <see cref="_nonzero"/>: w2_k in <see cref="_work2"/>, the
    /// scales in <see cref="_scales"/> and the background rows of G x in <paramref name="background"/>.</summary>
    private void PeriodicProduct(ReadOnlySpan<double> x, Span<double> background)
    {
        var n = Grid.Count;
        var s = x[..n];
        for (var k = 0; k < _sweeps.Length; k++)
        {
            var op = _ops[k];
            var c = Scale(k);
            var bg = x[n + k];
            op.Fold(s, _nonzero, _work1[k]);
            var kst1 = _kSt1[k];
            // background row: (c·A s)ᵀ1 + m·bg = c·(K Sᵀ1)·fold(s) + m·bg
            var w1 = _work1[k];
            var dot = 0.0;
            for (var a = 0; a < op.M; a++) dot += kst1[a] * w1[a];
            background[k] = c * dot + _sweeps[k].Signal.Length * bg;
            op.Convolve(_work1[k], _work2[k]);
            // bg·Sᵀ1 + c·SᵀS K fold(s) share one convolution below
            op.SampleNormal(_work2[k], _work1[k]);
            // K (c SᵀS K f s) + bg K Sᵀ1
            op.Convolve(w1, _work2[k]);
            var w2 = _work2[k];
            for (var a = 0; a < op.M; a++) w2[a] = c * w2[a] + bg * kst1[a];
            _scales[k] = c;
        }
    }

    private readonly List<int> _nonzero = [];
    private readonly double[] _scales;

    /// <summary>Entries G[rows, j] and the diagonal G[j, j].</summary>
    public void Column(int j, IReadOnlyList<int> rows, Span<double> result, out double diagonal)
    {
        var n = Grid.Count;
        if (j >= n)
        {
            var k = j - n;
            var c = Scale(k);
            for (var r = 0; r < rows.Count; r++)
            {
                var i = rows[r];
                result[r] = i >= n ? 0 : c * _ops[k].Gather(_kSt1[k], i);
            }

            diagonal = _sweeps[k].Signal.Length;
            return;
        }

        // grid column: u_k = K SᵀS K fold(e_j) per sweep, then gather
        for (var k = 0; k < _sweeps.Length; k++)
        {
            var op = _ops[k];
            op.ConvolvedUnit(j, _work2[k]);
            op.SampleNormal(_work2[k], _work1[k]);
            op.Convolve(_work1[k], _colCache[k]);
        }

        diagonal = 0;
        for (var k = 0; k < _sweeps.Length; k++)
        {
            var c = Scale(k);
            diagonal += c * c * _ops[k].Gather(_colCache[k], j);
        }

        if (_mu > 0) diagonal += _mu * ((j > 0 ? 1 : 0) + (j < n - 1 ? 1 : 0));
        for (var r = 0; r < rows.Count; r++)
        {
            var i = rows[r];
            double v = 0;
            if (i >= n)
            {
                var k = i - n;
                v = Scale(k) * _ops[k].Gather(_kSt1[k], j);
            }
            else
            {
                for (var k = 0; k < _sweeps.Length; k++)
                {
                    var c = Scale(k);
                    v += c * c * _ops[k].Gather(_colCache[k], i);
                }

                if (_mu > 0 && Math.Abs(i - j) == 1) v -= _mu;
            }

            result[r] = v;
        }
    }

    private CircularConvolver? _preconditioner;
    private double[]? _preWork;

    /// <summary>Relative floor of the preconditioner's symbol (bounds its amplification of the directions the kernel
    /// hardly sees).</summary>
    public const double PreconditionerFloor = 1e-5;

    /// <summary>
    /// z ≈ G⁻¹ r. On the grid G is nearly Toeplitz: G[i, j] depends mostly on the lag i − j (each sweep folds the grid by
    /// its FSR, convolves with the Airy kernel twice and weighs by the sampling density, which the scan spreads almost
    /// evenly over each FSR). Its first column t_d = G[d, 0] gives the optimal circulant approximation (T. Chan, "An
    /// optimal circulant preconditioner for Toeplitz systems", SIAM J. Sci. Stat. Comput. 9, 766–771, 1988), whose
    /// eigenvalues are the Fejér sums λ(θ) = Σ_{|d|&lt;n} (1 − |d|/n) t_d e^{−iθd} ≥ 0 — a comb at the harmonics of each
    /// FSR under the kernel's squared transform, plus the smoothness penalty between the teeth. They are evaluated on a
    /// zero-padded FFT grid of at least 2n points (with a small floor) and inverted there; the backgrounds are scaled by
    /// their diagonal. Set-up: one column of G; each application: two FFTs of 2n points.
    /// </summary>
    public void Precondition(ReadOnlySpan<double> r, Span<double> z)
    {
        var n = Grid.Count;
        if (_preconditioner is null)
        {
            var length = 1 << (int)Math.Ceiling(Math.Log2(Math.Max(4, 2 * n)));
            var rows = Enumerable.Range(0, n).ToList();
            var t = new double[n];
            Column(0, rows, t, out _);
            if (_mu > 0) t[0] += _mu; // the first column has one neighbour; an interior one has two
            var symbol = new double[length];
            var im0 = new double[length];
            symbol[0] = t[0];
            for (var d = 1; d < n; d++) symbol[d] = symbol[length - d] = (1 - d / (double)n) * t[d];
            Fft.Transform(symbol, im0, forward: true);
            // kernel with spectrum 1/symbol: inverse transform (the symbol is even, so the kernel is real and even)
            var re = symbol.Select(v => 1 / v).ToArray();
            var im = new double[length];
            Fft.Transform(re, im, forward: false);
            var check = (double[])re.Clone();
            var checkIm = new double[length];
            Fft.Transform(check, checkIm, forward: true);
            var norm = (1 / symbol[0]) / check[0];
            for (var q = 0; q < length; q++) re[q] *= norm;
            _preconditioner = new CircularConvolver(re);
            _preWork = new double[length];
        }

        var work = _preWork!;
        Array.Clear(work);
        r[..n].CopyTo(work);
        _preconditioner.Apply(work, work);
        work.AsSpan(0, n).CopyTo(z);
        for (var j = n; j < Count; j++) z[j] = r[j] / _sweeps[j - n].Signal.Length;
    }

    /// <summary>G[j, j] with the smoothness penalty; for a background entry the sample count of its sweep.</summary>
    public double Diagonal(int j)
    {
        var n = Grid.Count;
        if (j >= n) return _sweeps[j - n].Signal.Length;
        var d = ColumnNormSquared(j);
        if (_mu > 0) d += _mu * ((j > 0 ? 1 : 0) + (j < n - 1 ? 1 : 0));
        return d;
    }

    /// <summary>Diagonal entry G[j, j] of a grid column without the penalty (its squared column norm).</summary>
    public double ColumnNormSquared(int j)
    {
        double d = 0;
        for (var k = 0; k < _sweeps.Length; k++)
        {
            var c = Scale(k);
            d += c * c * _ops[k].UnitNormSquared(j, _work1[k]);
        }

        return d;
    }

    /// <summary>Model of every sweep (in signal units) for a solution x = (s, whitened backgrounds).</summary>
    public double[][] Model(ReadOnlySpan<double> x)
    {
        var n = Grid.Count;
        var result = new double[_sweeps.Length][];
        for (var k = 0; k < _sweeps.Length; k++)
        {
            var a = _ops[k].Forward(x[..n]);
            var bg = x[n + k] * _sweeps[k].NoiseSigma;
            for (var i = 0; i < a.Length; i++) a[i] = _gains[k] * a[i] + bg;
            result[k] = a;
        }

        return result;
    }

    /// <summary>
    /// Gauss–Newton step for the frequency origin of sweep k given a solution x: the model's derivative with
    /// respect to φ_k by central differences (two forward evaluations), then δφ = dᵀr / dᵀd.
    /// </summary>
    public double OffsetStep(int k, ReadOnlySpan<double> x)
    {
        var n = Grid.Count;
        var op = _ops[k];
        var phi = op.OffsetHz;
        var eps = op.Instrument.LinewidthHz / 50;
        op.SetOffset(phi + eps);
        var plus = op.Forward(x[..n]);
        op.SetOffset(phi - eps);
        var minus = op.Forward(x[..n]);
        op.SetOffset(phi);
        var model = op.Forward(x[..n]);
        var y = _sweeps[k].Signal;
        var bg = x[n + k] * _sweeps[k].NoiseSigma;
        double dr = 0, dd = 0;
        for (var i = 0; i < y.Length; i++)
        {
            var d = _gains[k] * (plus[i] - minus[i]) / (2 * eps);
            var r = y[i] - (_gains[k] * model[i] + bg);
            dr += d * r;
            dd += d * d;
        }

        return dd > 0 ? dr / dd : 0;
    }

    /// <summary>Unscaled A_k s for one sweep (no gain, no background): used to refit gains.</summary>
    public double[] ForwardUnscaled(int k, ReadOnlySpan<double> s) => _ops[k].Forward(s);
}
