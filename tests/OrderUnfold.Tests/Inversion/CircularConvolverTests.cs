using OrderUnfold.Inversion;
using Xunit;

namespace OrderUnfold.Tests.Inversion;

/// <summary>FFT circular convolution against the definition (y[a] = Σ_b k[(a − b) mod M] x[b]), on random (simulated) data.</summary>
public class CircularConvolverTests
{
    private static double[] EvenKernel(Random rng, int m)
    {
        var k = new double[m];
        for (var i = 0; i <= m / 2; i++)
        {
            var v = rng.NextDouble() - 0.3;
            k[i] = v;
            k[(m - i) % m] = v;
        }

        return k;
    }

    private static double[] Direct(double[] kernel, double[] x)
    {
        var m = x.Length;
        var y = new double[m];
        for (var a = 0; a < m; a++)
        {
            var s = 0.0;
            for (var b = 0; b < m; b++) s += kernel[((a - b) % m + m) % m] * x[b];
            y[a] = s;
        }

        return y;
    }

    [Theory]
    [InlineData(2)]
    [InlineData(4)]
    [InlineData(16)]
    [InlineData(64)]
    [InlineData(512)]
    [InlineData(2048)]
    public void MatchesDirectConvolution(int m)
    {
        var rng = new Random(m);
        var kernel = EvenKernel(rng, m);
        var conv = new CircularConvolver(kernel);
        Assert.Equal(m, conv.M);
        for (var trial = 0; trial < 3; trial++)
        {
            var x = Enumerable.Range(0, m).Select(_ => rng.NextDouble() * 2 - 1).ToArray();
            var expected = Direct(kernel, x);
            var y = new double[m];
            conv.Apply(x, y);
            var scale = expected.Max(Math.Abs) + 1e-300;
            for (var a = 0; a < m; a++) Assert.True(Math.Abs(y[a] - expected[a]) <= 1e-12 * scale * Math.Log2(m + 1), $"M={m} a={a}: {y[a]} vs {expected[a]}");
        }
    }

    [Fact]
    public void InPlaceApplicationWorks()
    {
        var rng = new Random(1);
        var kernel = EvenKernel(rng, 128);
        var conv = new CircularConvolver(kernel);
        var x = Enumerable.Range(0, 128).Select(_ => rng.NextDouble()).ToArray();
        var expected = Direct(kernel, x);
        conv.Apply(x, x);
        for (var a = 0; a < x.Length; a++) Assert.Equal(expected[a], x[a], 1e-11);
    }

    [Fact]
    public void KernelSpectrumOfAnEvenKernelIsItsCosineTransform()
    {
        var rng = new Random(2);
        const int m = 32;
        var kernel = EvenKernel(rng, m);
        var conv = new CircularConvolver(kernel);
        for (var f = 0; f < m; f++)
        {
            var expected = 0.0;
            for (var i = 0; i < m; i++) expected += kernel[i] * Math.Cos(2 * Math.PI * f * i / m);
            Assert.Equal(expected, conv.KernelSpectrum[f], 1e-12);
        }
    }

    [Theory]
    [InlineData(0)]
    [InlineData(1)]
    [InlineData(3)]
    [InlineData(48)]
    public void LengthMustBeAPowerOfTwo(int m)
    {
        var e = Assert.Throws<ArgumentException>(() => new CircularConvolver(new double[m]));
        Assert.Contains(m.ToString(), e.Message);
    }
}
