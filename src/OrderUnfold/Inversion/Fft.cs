namespace OrderUnfold.Inversion;

/// <summary>In-place iterative radix-2 complex FFT on separate real and imaginary arrays (length a power of two).</summary>
public static class Fft
{
    public static void Transform(double[] re, double[] im, bool forward)
    {
        var n = re.Length;
        if (n != im.Length || n < 1 || (n & (n - 1)) != 0) throw new ArgumentException($"FFT length must be a power of two but got {n}");
        for (int i = 1, j = 0; i < n; i++)
        {
            var bit = n >> 1;
            for (; (j & bit) != 0; bit >>= 1) j ^= bit;
            j ^= bit;
            if (i < j)
            {
                (re[i], re[j]) = (re[j], re[i]);
                (im[i], im[j]) = (im[j], im[i]);
            }
        }

        var sign = forward ? -1.0 : 1.0;
        for (var size = 2; size <= n; size <<= 1)
        {
            var half = size >> 1;
            var angle = sign * 2 * Math.PI / size;
            var wr0 = Math.Cos(angle);
            var wi0 = Math.Sin(angle);
            for (var start = 0; start < n; start += size)
            {
                double wr = 1, wi = 0;
                for (var k = 0; k < half; k++)
                {
                    var a = start + k;
                    var b = a + half;
                    var tr = wr * re[b] - wi * im[b];
                    var ti = wr * im[b] + wi * re[b];
                    re[b] = re[a] - tr;
                    im[b] = im[a] - ti;
                    re[a] += tr;
                    im[a] += ti;
                    var t = wr * wr0 - wi * wi0;
                    wi = wr * wi0 + wi * wr0;
                    wr = t;
                }
            }
        }

        if (!forward)
        {
            for (var i = 0; i < n; i++)
            {
                re[i] /= n;
                im[i] /= n;
            }
        }
    }
}
