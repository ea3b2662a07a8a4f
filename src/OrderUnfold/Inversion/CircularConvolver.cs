namespace OrderUnfold.Inversion;

/// <summary>
/// Circular convolution with a fixed real, even kernel on a periodic grid of M = 2^k points, by FFT.
/// Because the kernel is even (k[i] = k[M−i]) its transform is real and the operator is self-adjoint.
/// Uses an in-place iterative radix-2 FFT with precomputed twiddles (no allocation per call).
/// Not thread-safe (reuses work buffers).
/// </summary>
public sealed class CircularConvolver
{
    private readonly double[] _kernelSpectrum;
    private readonly double[] _re;
    private readonly double[] _im;
    private readonly double[] _cos;
    private readonly double[] _sin;
    private readonly int[] _bitReverse;

    public CircularConvolver(double[] evenKernel)
    {
        M = evenKernel.Length;
        if (M < 2 || (M & (M - 1)) != 0) throw new ArgumentException($"kernel length must be a power of two but got {M}");
        _re = new double[M];
        _im = new double[M];
        _cos = new double[M / 2];
        _sin = new double[M / 2];
        for (var i = 0; i < M / 2; i++)
        {
            _cos[i] = Math.Cos(2 * Math.PI * i / M);
            _sin[i] = -Math.Sin(2 * Math.PI * i / M);
        }

        _bitReverse = new int[M];
        var bits = (int)Math.Log2(M);
        for (var i = 0; i < M; i++)
        {
            var r = 0;
            for (var b = 0; b < bits; b++) r |= ((i >> b) & 1) << (bits - 1 - b);
            _bitReverse[i] = r;
        }

        Array.Copy(evenKernel, _re, M);
        Array.Clear(_im);
        Transform(forward: true);
        _kernelSpectrum = (double[])_re.Clone();
    }

    public int M { get; }

    /// <summary>Kernel spectrum (real).</summary>
    public IReadOnlyList<double> KernelSpectrum => _kernelSpectrum;

    /// <summary>result = kernel ⊛ input (both length M). Input and result may be the same array.</summary>
    public void Apply(double[] input, double[] result)
    {
        Array.Copy(input, _re, M);
        Array.Clear(_im);
        Transform(forward: true);
        for (var i = 0; i < M; i++)
        {
            _re[i] *= _kernelSpectrum[i];
            _im[i] *= _kernelSpectrum[i];
        }

        Transform(forward: false);
        var scale = 1.0 / M;
        for (var i = 0; i < M; i++) result[i] = _re[i] * scale;
    }

    private void Transform(bool forward)
    {
        var re = _re;
        var im = _im;
        var n = M;
        for (var i = 0; i < n; i++)
        {
            var j = _bitReverse[i];
            if (j > i)
            {
                (re[i], re[j]) = (re[j], re[i]);
                (im[i], im[j]) = (im[j], im[i]);
            }
        }

        var sign = forward ? 1.0 : -1.0;
        for (var size = 2; size <= n; size <<= 1)
        {
            var half = size >> 1;
            var step = n / size;
            for (var start = 0; start < n; start += size)
            {
                for (var k = 0; k < half; k++)
                {
                    var wr = _cos[k * step];
                    var wi = sign * _sin[k * step];
                    var a = start + k;
                    var b = a + half;
                    var tr = wr * re[b] - wi * im[b];
                    var ti = wr * im[b] + wi * re[b];
                    re[b] = re[a] - tr;
                    im[b] = im[a] - ti;
                    re[a] += tr;
                    im[a] += ti;
                }
            }
        }
    }
}
