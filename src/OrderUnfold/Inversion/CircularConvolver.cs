namespace OrderUnfold.Inversion;

/// <summary>
/// Circular convolution with a fixed real, even kernel on a periodic grid of M = 2^k points, by FFT
/// (<see cref="Fft"/>). Because the kernel is even (k[i] = k[M−i]) its transform is real and the operator is
/// self-adjoint. Not thread-safe (reuses work buffers).
/// </summary>
public sealed class CircularConvolver
{
    private readonly double[] _kernelSpectrum;
    private readonly double[] _re;
    private readonly double[] _im;

    public CircularConvolver(double[] evenKernel)
    {
        M = evenKernel.Length;
        if (M < 2 || (M & (M - 1)) != 0) throw new ArgumentException($"kernel length must be a power of two but got {M}");
        _re = (double[])evenKernel.Clone();
        _im = new double[M];
        Fft.Transform(_re, _im, forward: true);
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
        Fft.Transform(_re, _im, forward: true);
        for (var i = 0; i < M; i++)
        {
            _re[i] *= _kernelSpectrum[i];
            _im[i] *= _kernelSpectrum[i];
        }

        Fft.Transform(_re, _im, forward: false);
        Array.Copy(_re, result, M);
    }
}
