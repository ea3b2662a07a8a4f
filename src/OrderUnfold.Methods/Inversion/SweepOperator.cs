using OrderUnfold.Instruments;

namespace OrderUnfold.Inversion;

/// <summary>
/// Matrix-free forward model of one sweep: grid spectrum s → samples y(xᵢ) = Σⱼ sⱼ T(νⱼ − φ − f(xᵢ)).
/// Three linear steps, each with an exact transpose:
/// <list type="number">
/// <item>fold: each grid bin νⱼ goes to phase θ = (νⱼ − φ) mod FSR on a periodic grid of M points (step h),
/// split linearly between its two neighbouring points;</item>
/// <item>circular convolution with the Airy profile sampled on that periodic grid (FFT);</item>
/// <item>sampling at the scan positions uᵢ = f(xᵢ) mod FSR by linear interpolation.</item>
/// </list>
/// The gain and background of the sweep are applied by the caller. The sampling step enters the normal
/// equations only through SᵀS, which is tridiagonal (cyclic) on the periodic grid, so AᵀA s costs
/// O(n + M log M) whatever the sweep length.
/// </summary>
public sealed class SweepOperator
{
    private readonly int[] _sampleBin;
    private readonly double[] _sampleFrac;
    private readonly CircularConvolver _conv;
    private readonly double[] _kernel;
    private int[] _foldBin = [];
    private double[] _foldFrac = [];

    /// <param name="instrument">Cavity (FSR, finesse).</param>
    /// <param name="scanHz">Calibrated scan frequency shift f(xᵢ) of each sample, Hz.</param>
    /// <param name="grid">Frequency grid of the spectrum.</param>
    /// <param name="offsetHz">Frequency origin φ of this sweep.</param>
    /// <param name="periodicStepHz">Step h of the periodic grid (fine compared with the linewidth).</param>
    public SweepOperator(Instrument instrument, IReadOnlyList<double> scanHz, FrequencyGrid grid, double offsetHz, double periodicStepHz)
    {
        Instrument = instrument;
        Grid = grid;
        var fsr = instrument.FsrHz;
        var m = 1 << (int)Math.Ceiling(Math.Log2(Math.Max(16, fsr / periodicStepHz)));
        M = m;
        StepHz = fsr / m;
        var kernel = new double[m];
        for (var i = 0; i < m; i++) kernel[i] = Airy.Transmission(i * StepHz, fsr, instrument.Finesse);
        _conv = new CircularConvolver(kernel);
        _kernel = kernel;
        SampleCount = scanHz.Count;
        _sampleBin = new int[SampleCount];
        _sampleFrac = new double[SampleCount];
        Diagonal = new double[m];
        Upper = new double[m];
        for (var i = 0; i < SampleCount; i++)
        {
            var u = PositiveMod(scanHz[i], fsr) / StepHz;
            var a = (int)Math.Floor(u);
            var t = u - a;
            if (a >= m) { a -= m; }
            _sampleBin[i] = a;
            _sampleFrac[i] = t;
            var b = a + 1 == m ? 0 : a + 1;
            Diagonal[a] += (1 - t) * (1 - t);
            Diagonal[b] += t * t;
            Upper[a] += (1 - t) * t; // couples a and a+1 (cyclic)
        }

        SetOffset(offsetHz);
    }

    /// <summary>The cavity the sweep was taken with.</summary>
    public Instrument Instrument { get; }
    /// <summary>The unfold's frequency grid.</summary>
    public FrequencyGrid Grid { get; }

    /// <summary>Points of the periodic grid over one FSR (a power of two).</summary>
    public int M { get; }

    /// <summary>Step of the periodic grid, Hz.</summary>
    public double StepHz { get; }

    /// <summary>Number of samples of the sweep.</summary>
    public int SampleCount { get; }
    /// <summary>The sweep's frequency origin φ, Hz.</summary>
    public double OffsetHz { get; private set; }

    /// <summary>Diagonal of SᵀS on the periodic grid.</summary>
    public double[] Diagonal { get; }

    /// <summary>Super-diagonal of SᵀS: entry a couples points a and a+1 (mod M).</summary>
    public double[] Upper { get; }

    /// <summary>Changes the frequency origin φ (only the fold step depends on it).</summary>
    public void SetOffset(double offsetHz)
    {
        OffsetHz = offsetHz;
        var n = Grid.Count;
        _foldBin = new int[n];
        _foldFrac = new double[n];
        var fsr = Instrument.FsrHz;
        for (var j = 0; j < n; j++)
        {
            var u = PositiveMod(Grid[j] - offsetHz, fsr) / StepHz;
            var a = (int)Math.Floor(u);
            var t = u - a;
            if (a >= M) a -= M;
            _foldBin[j] = a;
            _foldFrac[j] = t;
        }

        // the cavity's transverse families: each line also transmits, with the family's relative height, where the
        // family is resonant, (−o_N mod 1)·FSR further along the scan; folded as extra copies of every bin, so the
        // (even) Airy convolution and its adjoint are unchanged and the instrument response is Airy ⊛ (TEM00 + families)
        var fams = Instrument.Families;
        _famBin = new int[fams.Count][];
        _famFrac = new double[fams.Count][];
        _famHeight = fams.Select(f => f.RelativeHeight).ToArray();
        for (var q = 0; q < fams.Count; q++)
        {
            var shift = fams[q].ApparentOffsetFsr * M;
            _famBin[q] = new int[n];
            _famFrac[q] = new double[n];
            for (var j = 0; j < n; j++)
            {
                var u = _foldBin[j] + _foldFrac[j] + shift;
                if (u >= M) u -= M;
                var a = (int)Math.Floor(u);
                if (a >= M) a -= M;
                _famBin[q][j] = a;
                _famFrac[q][j] = u - Math.Floor(u);
            }
        }
    }

    private int[][] _famBin = [];
    private double[][] _famFrac = [];
    private double[] _famHeight = [];

    /// <summary>Fold: grid spectrum (n) → periodic grid (M).</summary>
    public void Fold(ReadOnlySpan<double> s, double[] periodic)
    {
        Array.Clear(periodic);
        for (var j = 0; j < s.Length; j++)
        {
            var v = s[j];
            if (v == 0) continue;
            FoldBin(j, v, periodic);
        }
    }

    /// <summary>Adds bin j of value v to the periodic grid: its TEM00 place and each family's, shared linearly between the two
    /// nearest periodic bins.</summary>
    [System.Runtime.CompilerServices.MethodImpl(System.Runtime.CompilerServices.MethodImplOptions.AggressiveInlining)]
    private void FoldBin(int j, double v, double[] periodic)
    {
        var a = _foldBin[j];
        var t = _foldFrac[j];
        periodic[a] += (1 - t) * v;
        periodic[a + 1 == M ? 0 : a + 1] += t * v;
        for (var q = 0; q < _famHeight.Length; q++)
        {
            var b = _famBin[q][j];
            var u = _famFrac[q][j];
            var w = _famHeight[q] * v;
            periodic[b] += (1 - u) * w;
            periodic[b + 1 == M ? 0 : b + 1] += u * w;
        }
    }

    /// <summary><see cref="Fold(ReadOnlySpan{double}, double[])"/> of a spectrum whose nonzero bins are listed (ascending) in <paramref name="nonzero"/>:
    /// O(nonzero) instead of O(n), with the same sums in the same order.</summary>
    public void Fold(ReadOnlySpan<double> s, List<int> nonzero, double[] periodic)
    {
        Array.Clear(periodic);
        foreach (var j in nonzero)
        {
            var v = s[j];
            FoldBin(j, v, periodic);
        }
    }

    /// <summary>
    /// result[j] = Σ_k scales[k] · Gather_k(periodic[k], j) for every grid bin: <see cref="FoldTransposeAdd"/> of all sweeps
    /// (which share one grid) into a cleared vector in one pass over the grid instead of one per sweep, with the same sums in
    /// the same order.
    /// </summary>
    public static void FoldTransposeAll(SweepOperator[] ops, double[][] periodic, double[] scales, Span<double> result)
    {
        var n = result.Length;
        if (ops.Any(o => o._famHeight.Length > 0) || ops.Length != 2)
        {
            for (var j = 0; j < n; j++)
            {
                var v = 0.0;
                for (var k = 0; k < ops.Length; k++) v += scales[k] * ops[k].Gather(periodic[k], j);
                result[j] = v;
            }

            return;
        }

        // two sweeps without transverse families (the common case), written out
        var bin0 = ops[0]._foldBin;
        var frac0 = ops[0]._foldFrac;
        var p0 = periodic[0];
        var m0 = ops[0].M;
        var c0 = scales[0];
        var bin1 = ops[1]._foldBin;
        var frac1 = ops[1]._foldFrac;
        var p1 = periodic[1];
        var m1 = ops[1].M;
        var c1 = scales[1];
        for (var j = 0; j < n; j++)
        {
            var a = bin0[j];
            var t = frac0[j];
            var g0 = (1 - t) * p0[a] + t * p0[a + 1 == m0 ? 0 : a + 1];
            var b = bin1[j];
            var u = frac1[j];
            var g1 = (1 - u) * p1[b] + u * p1[b + 1 == m1 ? 0 : b + 1];
            result[j] = 0.0 + c0 * g0 + c1 * g1;
        }
    }

    /// <summary>Transpose of <see cref="Fold(ReadOnlySpan{double}, double[])"/>: periodic grid (M) → grid (n), added into <paramref name="result"/> times <paramref name="scale"/>.</summary>
    public void FoldTransposeAdd(double[] periodic, Span<double> result, double scale)
    {
        for (var j = 0; j < result.Length; j++)
        {
            result[j] += scale * Gather(periodic, j);
        }
    }

    /// <summary>Value at grid bin j of a periodic-grid vector, gathered with the fold weights.</summary>
    public double Gather(double[] periodic, int j)
    {
        var a = _foldBin[j];
        var t = _foldFrac[j];
        var v = (1 - t) * periodic[a] + t * periodic[a + 1 == M ? 0 : a + 1];
        for (var q = 0; q < _famHeight.Length; q++)
        {
            var b = _famBin[q][j];
            var u = _famFrac[q][j];
            v += _famHeight[q] * ((1 - u) * periodic[b] + u * periodic[b + 1 == M ? 0 : b + 1]);
        }

        return v;
    }

    /// <summary>Puts a unit bin j onto a cleared periodic vector.</summary>
    public void FoldUnit(int j, double[] periodic)
    {
        Array.Clear(periodic);
        var a = _foldBin[j];
        var t = _foldFrac[j];
        periodic[a] += 1 - t;
        periodic[a + 1 == M ? 0 : a + 1] += t;
        for (var q = 0; q < _famHeight.Length; q++)
        {
            var b = _famBin[q][j];
            var u = _famFrac[q][j];
            periodic[b] += _famHeight[q] * (1 - u);
            periodic[b + 1 == M ? 0 : b + 1] += _famHeight[q] * u;
        }
    }

    /// <summary>K·fold(e_j) — the Airy profile of a unit bin j on the periodic grid — written directly from the kernel
    /// (the unit bin's two fold weights times the kernel shifted to its two periodic points), without a convolution.</summary>
    public void ConvolvedUnit(int j, double[] periodic)
    {
        var a = _foldBin[j];
        var t = _foldFrac[j];
        var m = M;
        var kernel = _kernel;
        // periodic[p] = (1 − t)·k[(p − a) mod M] + t·k[(p − a − 1) mod M]
        for (var p = 0; p < m; p++)
        {
            var d = p - a;
            if (d < 0) d += m;
            var d1 = d == 0 ? m - 1 : d - 1;
            periodic[p] = (1 - t) * kernel[d] + t * kernel[d1];
        }

        for (var q = 0; q < _famHeight.Length; q++)
        {
            var b = _famBin[q][j];
            var u = _famFrac[q][j];
            var h = _famHeight[q];
            for (var p = 0; p < m; p++)
            {
                var d = p - b;
                if (d < 0) d += m;
                var d1 = d == 0 ? m - 1 : d - 1;
                periodic[p] += h * ((1 - u) * kernel[d] + u * kernel[d1]);
            }
        }
    }

    /// <summary>‖S K fold(e_j)‖² — the squared norm of a unit bin's model (no gain) — in O(M), without a convolution:
    /// v = K fold(e_j) from the kernel, then vᵀ(SᵀS)v with the cyclic tridiagonal SᵀS.</summary>
    public double UnitNormSquared(int j, double[] work)
    {
        ConvolvedUnit(j, work);
        var m = M;
        double sum = 0;
        for (var p = 0; p < m; p++)
        {
            var next = p + 1 == m ? 0 : p + 1;
            sum += work[p] * (Diagonal[p] * work[p] + 2 * Upper[p] * work[next]);
        }

        return sum;
    }

    /// <summary>Circular convolution with the Airy profile (self-adjoint).</summary>
    public void Convolve(double[] input, double[] result) => _conv.Apply(input, result);

    /// <summary>Sampling: periodic grid → samples.</summary>
    public void Sample(double[] periodic, Span<double> samples)
    {
        for (var i = 0; i < SampleCount; i++)
        {
            var a = _sampleBin[i];
            var t = _sampleFrac[i];
            samples[i] = (1 - t) * periodic[a] + t * periodic[a + 1 == M ? 0 : a + 1];
        }
    }

    /// <summary>Transpose of <see cref="Sample"/>: samples → periodic grid (overwrites).</summary>
    public void SampleTranspose(ReadOnlySpan<double> samples, double[] periodic)
    {
        Array.Clear(periodic);
        for (var i = 0; i < SampleCount; i++)
        {
            var a = _sampleBin[i];
            var t = _sampleFrac[i];
            periodic[a] += (1 - t) * samples[i];
            periodic[a + 1 == M ? 0 : a + 1] += t * samples[i];
        }
    }

    /// <summary>SᵀS v (cyclic tridiagonal), overwriting result.</summary>
    public void SampleNormal(double[] v, double[] result)
    {
        var m = M;
        for (var a = 0; a < m; a++)
        {
            var prev = a == 0 ? m - 1 : a - 1;
            var next = a + 1 == m ? 0 : a + 1;
            result[a] = Diagonal[a] * v[a] + Upper[a] * v[next] + Upper[prev] * v[prev];
        }
    }

    /// <summary>y = A s (no gain, no background).</summary>
    public double[] Forward(ReadOnlySpan<double> s)
    {
        var p = new double[M];
        var q = new double[M];
        Fold(s, p);
        Convolve(p, q);
        var y = new double[SampleCount];
        Sample(q, y);
        return y;
    }

    /// <summary>Aᵀ r, added into result times scale.</summary>
    public void AdjointAdd(ReadOnlySpan<double> r, Span<double> result, double scale = 1)
    {
        var p = new double[M];
        var q = new double[M];
        SampleTranspose(r, p);
        Convolve(p, q);
        FoldTransposeAdd(q, result, scale);
    }

    /// <summary>The periodic model P(u) = (fold(s) ⊛ T)(u) on the periodic grid.</summary>
    public double[] PeriodicModel(ReadOnlySpan<double> s)
    {
        var p = new double[M];
        var q = new double[M];
        Fold(s, p);
        Convolve(p, q);
        return q;
    }

    /// <summary><paramref name="a"/> modulo <paramref name="m"/>, in [0, m).</summary>
    public static double PositiveMod(double a, double m)
    {
        var r = a % m;
        return r < 0 ? r + m : r;
    }
}
