namespace OrderUnfold.Numerics;

/// <summary>
/// Circular convolution with a fixed real, even kernel on a periodic grid of M = 2^k points, by FFT
/// (<see cref="Fft"/>). Because the kernel is even (k[i] = k[M−i]) its transform is real and the operator is
/// self-adjoint. A real input of length M is transformed as a complex sequence of length M/2 (even samples as real
/// parts, odd samples as imaginary parts) and split into its even and odd halves' spectra afterwards, which halves
/// the work of a complex transform of length M. Not thread-safe (reuses work buffers).
/// </summary>
public sealed class CircularConvolver
{
    private readonly double[] _kernelSpectrum;
    private readonly double[] _re;
    private readonly double[] _im;
    private readonly Fft.Plan _half;
    private readonly Fft.Plan _full;

    /// <summary>A convolver with <paramref name="evenKernel"/> (symmetric, length a power of two), transformed once.</summary>
    public CircularConvolver(double[] evenKernel)
    {
        M = evenKernel.Length;
        if (M < 2 || (M & (M - 1)) != 0) throw new ArgumentException($"kernel length must be a power of two but got {M}");
        var re = (double[])evenKernel.Clone();
        var im = new double[M];
        Fft.Transform(re, im, forward: true);
        _kernelSpectrum = re;
        _full = Fft.For(M);
        _half = Fft.For(M / 2);
        _re = new double[M / 2];
        _im = new double[M / 2];
    }

    /// <summary>Length of the periodic grid.</summary>
    public int M { get; }

    /// <summary>Kernel spectrum (real).</summary>
    public IReadOnlyList<double> KernelSpectrum => _kernelSpectrum;

    /// <summary>result = kernel ⊛ input (both length M). Input and result may be the same array.</summary>
    public void Apply(double[] input, double[] result)
    {
        var h = M / 2;
        var re = _re;
        var im = _im;
        for (var m = 0; m < h; m++)
        {
            re[m] = input[2 * m];
            im[m] = input[2 * m + 1];
        }

        Fft.Transform(re, im, forward: true, _half);
        // With Z = FFT_h(z), z[m] = x[2m] + i·x[2m+1]: E[k] = (Z[k] + conj Z[h−k])/2 and O[k] = (Z[k] − conj Z[h−k])/(2i) are
        // the spectra of the even and odd samples, X[k] = E[k] + W^k O[k] and X[k+h] = E[k] − W^k O[k] (W = e^(−2πi/M)).
        // After Y = H·X (H real and even), E' = (Y[k] + Y[k+h])/2 and O' = (Y[k] − Y[k+h])/(2W^k) give back Z' = E' + i·O'.
        // k and h−k are handled together so the arrays can be overwritten in place.
        var cos = _full.Cos;
        var sin = _full.Sin;
        var hk = _kernelSpectrum;
        for (var k = 0; k <= h / 2; k++)
        {
            var q = k == 0 ? 0 : h - k;
            double zr = re[k], zi = im[k], cr = re[q], ci = -im[q]; // Z[k], conj Z[h−k]
            Mix(k, zr, zi, cr, ci, out var nr, out var ni);
            if (q != k)
            {
                Mix(q, re[q], im[q], re[k], -im[k], out var mr, out var mi);
                re[q] = mr;
                im[q] = mi;
            }

            re[k] = nr;
            im[k] = ni;
        }

        Fft.Transform(re, im, forward: false, _half);
        var scale = 1.0 / h;
        for (var m = 0; m < h; m++)
        {
            result[2 * m] = re[m] * scale;
            result[2 * m + 1] = im[m] * scale;
        }

        void Mix(int k, double zr, double zi, double cr, double ci, out double outR, out double outI)
        {
            // E = (Z + C)/2, O = (Z − C)/(2i)
            var er = 0.5 * (zr + cr);
            var ei = 0.5 * (zi + ci);
            var or = 0.5 * (zi - ci);
            var oi = -0.5 * (zr - cr);
            double wr = cos[k], wi = sin[k]; // W^k
            var tr = wr * or - wi * oi; // W^k O
            var ti = wr * oi + wi * or;
            double hk0 = hk[k], hk1 = hk[k + h];
            // Y[k] = H[k](E + W^k O), Y[k+h] = H[k+h](E − W^k O)
            double y0r = hk0 * (er + tr), y0i = hk0 * (ei + ti);
            double y1r = hk1 * (er - tr), y1i = hk1 * (ei - ti);
            // E' = (Y0 + Y1)/2, O' = (Y0 − Y1)/2 · conj(W^k); Z' = E' + i O'
            var e2r = 0.5 * (y0r + y1r);
            var e2i = 0.5 * (y0i + y1i);
            var dr = 0.5 * (y0r - y1r);
            var di = 0.5 * (y0i - y1i);
            var o2r = wr * dr + wi * di;
            var o2i = wr * di - wi * dr;
            outR = e2r - o2i;
            outI = e2i + o2r;
        }
    }
}
