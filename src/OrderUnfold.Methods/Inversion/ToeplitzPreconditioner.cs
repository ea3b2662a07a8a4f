using OrderUnfold.Instruments;

namespace OrderUnfold.Inversion;

/// <summary>
/// An approximate inverse of the unfolding problem's normal matrix built from its Toeplitz structure on the grid, for the
/// dense-support solver (<see cref="ProjectedNewtonNnls"/>).
/// <para>
/// Per sweep the grid part of the normal matrix is Fᵀ K SᵀS K F: fold to the FSR-periodic grid (F), Airy convolution
/// (K, circulant), sampling (SᵀS, nearly a multiple of the identity: the scan spreads the samples almost evenly over the
/// FSR). Replacing SᵀS by its average and the fold's linear interpolation by its average over the bins' sub-step
/// positions makes G[i, j] a function of the lag i − j alone: an n × n Toeplitz matrix whose entries are the cosine sums
/// t_d = Σ_sweeps c² / M Σ_m w_m cos(2π m d h / FSR) over the FSR harmonics m (w_m ≥ 0: the squared Airy transform, the
/// sampling average, the interpolation's attenuation and the transverse families' comb), so the matrix is positive
/// semidefinite by construction; the smoothness penalty adds μ(2, −1). The constant harmonic (m = 0) is left out: the
/// sweeps' free backgrounds remove it (the backgrounds are eliminated exactly, by their Schur complement, around the
/// Toeplitz part).
/// </para>
/// <para>
/// Unlike a circulant approximation of the same matrix (T. Chan's optimal circulant, the previous preconditioner), this
/// keeps the fold: the harmonics of each FSR fall between the grid's Fourier frequencies, and only the finite Toeplitz
/// section, inverted exactly, resolves them. Its inverse is applied by the Gohberg–Semencul formula
/// T⁻¹ = (L(x)L(x)ᵀ − L(x̂)L(x̂)ᵀ) / x₀ (I. Gohberg &amp; A. Semencul, 1972; Golub &amp; Van Loan, <i>Matrix Computations</i>,
/// 4th ed., §4.7), with x = T⁻¹e₀ from Durbin's recursion (Golub &amp; Van Loan Alg. 4.7.1, O(n²) once) and
/// x̂ = (0, x_{n−1}, …, x₁); each application costs four FFTs of length ≥ 2n, so O(n log n).
/// </para>
/// On the simulated dense-support problems the eigenvalues of T⁻¹G lie within a factor of about 2 of 1 where
/// T. Chan's circulant left them spread over four decades. The set-up is O(n²), so the preconditioner is built only
/// up to <see cref="MaxBins"/> grid bins.
/// </summary>
public sealed class ToeplitzPreconditioner : INormalPreconditioner, INormalPreconditionerColumns
{
    /// <summary>Largest grid for which the O(n²) set-up (Durbin's recursion) is done (about 0.3 s at this size).</summary>
    public const int MaxBins = 16384;

    private readonly int _n;
    private readonly int _count;
    private readonly int _length;
    private readonly double _x0;
    private readonly double[] _x;
    private readonly double[]?[] _anchors;
    private readonly double[] _xRe, _xIm, _yRe, _yIm;
    private readonly double[][] _coupling; // G[grid, background k]
    private readonly double[] _backgroundDiagonal;
    private readonly double[] _re, _im, _re2, _im2;

    private ToeplitzPreconditioner(int n, int count, double[] symbol, double[] x, double[][] coupling, double[] backgroundDiagonal)
    {
        _n = n;
        _count = count;
        Symbol = symbol;
        _x0 = x[0];
        _x = x;
        _anchors = new double[(n + AnchorSpacing - 1) / AnchorSpacing][];
        _length = 1 << (int)Math.Ceiling(Math.Log2(Math.Max(4, 2 * n)));
        _xRe = new double[_length];
        _xIm = new double[_length];
        _yRe = new double[_length];
        _yIm = new double[_length];
        for (var i = 0; i < n; i++) _xRe[i] = x[i];
        for (var i = 1; i < n; i++) _yRe[i] = x[n - i];
        Fft.Transform(_xRe, _xIm, forward: true);
        Fft.Transform(_yRe, _yIm, forward: true);
        _coupling = coupling;
        _backgroundDiagonal = backgroundDiagonal;
        _re = new double[_length];
        _im = new double[_length];
        _re2 = new double[_length];
        _im2 = new double[_length];
    }

    /// <summary>First column t of the Toeplitz approximation of the grid block (background Schur complement included).</summary>
    public double[] Symbol { get; }

    /// <summary>
    /// Builds the preconditioner of <paramref name="problem"/>, or returns null (with the reason) when the grid is larger
    /// than <see cref="MaxBins"/> or the Toeplitz matrix is not numerically positive definite (Durbin's recursion breaks
    /// down, as it can without a smoothness weight).
    /// </summary>
    public static ToeplitzPreconditioner? TryCreate(UnfoldProblem problem, out string reason)
    {
        var n = problem.Grid.Count;
        if (n > MaxBins)
        {
            reason = $"grid of {n} bins is larger than {MaxBins}";
            return null;
        }

        if (n < 2)
        {
            reason = "grid of fewer than two bins";
            return null;
        }

        var t = BuildSymbol(problem);
        var x = ToeplitzRecursions.InverseFirstColumn(t);
        if (x is null)
        {
            reason = "Toeplitz approximation not numerically positive definite";
            return null;
        }

        var k = problem.SweepCount;
        var rows = Enumerable.Range(0, n).ToList();
        var coupling = new double[k][];
        var backgroundDiagonal = new double[k];
        for (var s = 0; s < k; s++)
        {
            coupling[s] = new double[n];
            problem.Column(n + s, rows, coupling[s], out backgroundDiagonal[s]);
        }

        reason = "";
        return new ToeplitzPreconditioner(n, problem.Count, t, x, coupling, backgroundDiagonal);
    }

    /// <summary>The Toeplitz entries t_d, d = 0 … n − 1 (see the class summary).</summary>
    public static double[] BuildSymbol(UnfoldProblem problem)
    {
        var n = problem.Grid.Count;
        var h = problem.Grid.StepHz;
        var t = new double[n];
        for (var k = 0; k < problem.SweepCount; k++)
        {
            var op = problem.Operators[k];
            var m = op.M;
            var fsr = op.Instrument.FsrHz;
            var re = new double[m];
            var im = new double[m];
            for (var a = 0; a < m; a++) re[a] = Airy.Transmission(a * op.StepHz, fsr, op.Instrument.Finesse);
            Fft.Transform(re, im, forward: true);
            var dMean = op.Diagonal.Average();
            var uMean = op.Upper.Average();
            var c = problem.Scale(k);
            var families = op.Instrument.Families;
            // weights w_m for m = 1 … M/2 (even in m); the diagonal gets the interpolation's mean square, the other lags its
            // squared mean
            var half = m / 2;
            var wOff = new double[half + 1];
            var wDiag = new double[half + 1];
            var max = 0.0;
            for (var q = 1; q <= half; q++)
            {
                var theta = 2 * Math.PI * q / m;
                var kappa = re[q];
                var sampling = dMean + 2 * uMean * Math.Cos(theta);
                double fr = 1, fi = 0;
                foreach (var f in families)
                {
                    var phase = -theta * f.ApparentOffsetFsr * m;
                    fr += f.RelativeHeight * Math.Cos(phase);
                    fi += f.RelativeHeight * Math.Sin(phase);
                }

                var baseWeight = c * c / m * kappa * kappa * Math.Max(0, sampling) * (fr * fr + fi * fi);
                var sinc = theta / 2 < 1e-12 ? 1 : Math.Sin(theta / 2) / (theta / 2);
                wOff[q] = baseWeight * Math.Pow(sinc, 4);
                wDiag[q] = baseWeight * (1 - (1 - Math.Cos(theta)) / 3);
                max = Math.Max(max, wDiag[q]);
            }

            var last = half;
            while (last > 1 && wDiag[last] < 1e-17 * max) last--;
            for (var q = 1; q <= last; q++)
            {
                var factor = q == half ? 1.0 : 2.0; // ±m, the Nyquist harmonic once
                wOff[q] *= factor;
                wDiag[q] *= factor;
                t[0] += wDiag[q];
            }

            // t_d = Σ_m w_m cos(m α_d), α_d = 2π d h / FSR, by the Chebyshev recurrence cos((m+1)α) = 2cos α cos(mα) − cos((m−1)α)
            for (var d = 1; d < n; d++)
            {
                var alpha = 2 * Math.PI * (d * h / fsr % 1.0);
                var twoCos = 2 * Math.Cos(alpha);
                double prev = 1, cur = Math.Cos(alpha), sum = 0;
                for (var q = 1; q <= last; q++)
                {
                    sum += wOff[q] * cur;
                    var next = twoCos * cur - prev;
                    prev = cur;
                    cur = next;
                }

                t[d] += sum;
            }
        }

        var mu = problem.SmoothnessWeight;
        t[0] += 2 * mu;
        if (n > 1) t[1] -= mu;
        return t;
    }

    /// <summary>z = T⁻¹ r on the grid block (length n each), by the Gohberg–Semencul formula with four FFTs.</summary>
    public void ApplyToeplitzInverse(ReadOnlySpan<double> r, Span<double> z)
    {
        var n = _n;
        var len = _length;
        var re = _re;
        var im = _im;
        Array.Clear(re);
        Array.Clear(im);
        r[..n].CopyTo(re);
        Fft.Transform(re, im, forward: true);
        // u₁ = L(x)ᵀ r and u₂ = L(x̂)ᵀ r (correlations) in one inverse transform: real and imaginary parts
        var re2 = _re2;
        var im2 = _im2;
        for (var q = 0; q < len; q++)
        {
            // conj(X)·R + i·conj(Y)·R
            var ar = _xRe[q] * re[q] + _xIm[q] * im[q];
            var ai = _xRe[q] * im[q] - _xIm[q] * re[q];
            var br = _yRe[q] * re[q] + _yIm[q] * im[q];
            var bi = _yRe[q] * im[q] - _yIm[q] * re[q];
            re2[q] = ar - bi;
            im2[q] = ai + br;
        }

        Fft.Transform(re2, im2, forward: false);
        for (var q = n; q < len; q++)
        {
            re2[q] = 0;
            im2[q] = 0;
        }

        Fft.Transform(re2, im2, forward: true);
        // split the transforms of the two real sequences, then X·U₁ − Y·U₂
        for (var q = 0; q < len; q++)
        {
            var p = q == 0 ? 0 : len - q;
            var u1r = 0.5 * (re2[q] + re2[p]);
            var u1i = 0.5 * (im2[q] - im2[p]);
            var u2r = 0.5 * (im2[q] + im2[p]);
            var u2i = -0.5 * (re2[q] - re2[p]);
            re[q] = _xRe[q] * u1r - _xIm[q] * u1i - (_yRe[q] * u2r - _yIm[q] * u2i);
            im[q] = _xRe[q] * u1i + _xIm[q] * u1r - (_yRe[q] * u2i + _yIm[q] * u2r);
        }

        Fft.Transform(re, im, forward: false);
        var inv = 1 / _x0;
        for (var i = 0; i < n; i++) z[i] = re[i] * inv;
    }

    /// <summary>Spacing of the columns of T⁻¹ computed by the Gohberg–Semencul product and kept, from which the other
    /// columns are reached by the Trench recurrence.</summary>
    private const int AnchorSpacing = 64;

    private double[]? _unit;

    /// <summary>
    /// Column j of T⁻¹ (length n). From the Gohberg–Semencul formula, neighbouring entries along a diagonal of T⁻¹ differ
    /// by a rank-two term: (T⁻¹)[i, j] = (T⁻¹)[i − 1, j − 1] + (x_i x_j − x̂_i x̂_j) / x₀ (W. F. Trench, "An algorithm for the
    /// inversion of finite Toeplitz matrices", J. SIAM 12, 515–522, 1964; Golub &amp; Van Loan, 4th ed., §4.7.4), with the
    /// first row x and the last row x reversed (T⁻¹ is symmetric and persymmetric). So a column follows from its neighbour
    /// in O(n). It is walked from the nearest known column: the first (x) and the last (x reversed), the column computed
    /// last (the face preconditioner asks for new columns in increasing order, so this is usually a few steps away), or an
    /// anchor column (every <see cref="AnchorSpacing"/>-th, computed by the four-FFT product when first needed and kept),
    /// at most half the spacing steps, instead of one O(n log n) product per column. One step costs about 1/100 of a
    /// four-FFT product at 4 096 bins, so the anchors are sparse.
    /// </summary>
    public void ToeplitzInverseColumn(int j, Span<double> c)
    {
        var n = _n;
        // the nearest known column: the first (x itself), the last (x reversed, by persymmetry), the column computed last,
        // a computed anchor; an anchor is computed only when all of them are more than half the spacing away
        var from = 0;
        var source = 0; // 0: first column, 1: last column, 2: the previous column, 3: an anchor
        var best = j;
        if (n - 1 - j < best)
        {
            best = n - 1 - j;
            from = n - 1;
            source = 1;
        }

        if (_last is not null && Math.Abs(j - _lastIndex) < best && _lastSteps + Math.Abs(j - _lastIndex) <= MaxChainedSteps)
        {
            best = Math.Abs(j - _lastIndex);
            from = _lastIndex;
            source = 2;
        }

        var a = Math.Min((j + AnchorSpacing / 2) / AnchorSpacing, _anchors.Length - 1);
        if (Math.Abs(j - a * AnchorSpacing) < best && (_anchors[a] is not null || best > AnchorSpacing / 2))
        {
            if (_anchors[a] is null)
            {
                var unit = _unit ??= new double[n];
                var column = new double[n];
                unit[a * AnchorSpacing] = 1;
                ApplyToeplitzInverse(unit, column);
                unit[a * AnchorSpacing] = 0;
                _anchors[a] = column;
            }

            from = a * AnchorSpacing;
            source = 3;
        }

        switch (source)
        {
            case 0:
                _x.CopyTo(c);
                break;
            case 1:
                for (var i = 0; i < n; i++) c[i] = _x[n - 1 - i];
                break;
            case 2:
                _last!.CopyTo(c);
                break;
            default:
                _anchors[a]!.CopyTo(c);
                break;
        }

        ToeplitzRecursions.WalkColumn(_x, c, from, j);
        _lastSteps = (source == 2 ? _lastSteps : 0) + Math.Abs(j - from);
        _last ??= new double[n];
        c.CopyTo(_last);
        _lastIndex = j;
    }

    /// <summary>Most recurrence steps between a column and the exactly computed one it was walked from: each step adds
    /// a rounding error of about one unit in the last place of the largest entries (the recurrence shifts and adds, it does
    /// not amplify), so chains stay well below the 10⁻⁹ relative accuracy the face preconditioner is checked at.</summary>
    private const int MaxChainedSteps = 256;

    private double[]? _last;
    private int _lastIndex = -1;
    private int _lastSteps;

    /// <summary>z = P e_j: the grid part T⁻¹ e_j (for a grid entry), the backgrounds by their elimination (as in
    /// <see cref="Precondition"/>); for a background entry the general product.</summary>
    public void Column(int j, Span<double> z)
    {
        var n = _n;
        if (j >= n)
        {
            var e = new double[_count];
            e[j] = 1;
            Precondition(e, z);
            return;
        }

        ToeplitzInverseColumn(j, z[..n]);
        for (var k = 0; k < _coupling.Length; k++)
        {
            var col = _coupling[k];
            var dot = 0.0;
            for (var i = 0; i < n; i++) dot += col[i] * z[i];
            z[n + k] = -dot / _backgroundDiagonal[k];
        }
    }

    private double[]? _shifted;

    /// <summary>
    /// z ≈ G⁻¹ r for a full-length r (grid entries, then one background per sweep): the backgrounds are eliminated by
    /// their exact block (G_bb is diagonal, G_sb is known), the grid's Schur complement is approximated by the Toeplitz
    /// matrix: z_s = T⁻¹(r_s − G_sb G_bb⁻¹ r_b), z_b = G_bb⁻¹(r_b − G_bs z_s). Symmetric positive definite.
    /// </summary>
    public void Precondition(ReadOnlySpan<double> r, Span<double> z)
    {
        var n = _n;
        var shifted = _shifted ??= new double[n];
        r[..n].CopyTo(shifted);
        for (var k = 0; k < _coupling.Length; k++)
        {
            var f = r[n + k] / _backgroundDiagonal[k];
            if (f == 0) continue;
            var col = _coupling[k];
            for (var j = 0; j < n; j++) shifted[j] -= col[j] * f;
        }

        ApplyToeplitzInverse(shifted, z);
        for (var k = 0; k < _coupling.Length; k++)
        {
            var col = _coupling[k];
            var dot = 0.0;
            for (var j = 0; j < n; j++) dot += col[j] * z[j];
            z[n + k] = (r[n + k] - dot) / _backgroundDiagonal[k];
        }
    }
}
