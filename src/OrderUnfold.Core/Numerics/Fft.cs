using System.Collections.Concurrent;

namespace OrderUnfold.Numerics;

/// <summary>
/// In-place iterative radix-2 complex FFT on separate real and imaginary arrays (length a power of two), with the
/// bit-reversal permutation and the twiddle factors tabulated once per length and shared by all threads.
/// </summary>
public static class Fft
{
    private static readonly ConcurrentDictionary<int, Plan> Plans = new();

    /// <summary>Tables of one transform length n: bit-reversed pairs to swap and e^(−2πik/n), k &lt; n/2.</summary>
    public sealed class Plan
    {
        /// <summary>The tables for length <paramref name="n"/> (a power of two).</summary>
        public Plan(int n)
        {
            N = n;
            var swaps = new List<int>();
            for (int i = 1, j = 0; i < n; i++)
            {
                var bit = n >> 1;
                for (; (j & bit) != 0; bit >>= 1) j ^= bit;
                j ^= bit;
                if (i < j)
                {
                    swaps.Add(i);
                    swaps.Add(j);
                }
            }

            Swaps = swaps.ToArray();
            Cos = new double[Math.Max(1, n / 2)];
            Sin = new double[Math.Max(1, n / 2)];
            for (var k = 0; k < n / 2; k++)
            {
                var angle = -2 * Math.PI * k / n;
                Cos[k] = Math.Cos(angle);
                Sin[k] = Math.Sin(angle);
            }
        }

        /// <summary>Transform length.</summary>
        public int N { get; }
        /// <summary>Index pairs (i, j), i &lt; j, exchanged by the bit-reversal permutation.</summary>
        public int[] Swaps { get; }
        /// <summary>cos(−2πk/n), k &lt; n/2.</summary>
        public double[] Cos { get; }
        /// <summary>sin(−2πk/n), k &lt; n/2.</summary>
        public double[] Sin { get; }
    }

    /// <summary>The plan for length <paramref name="n"/>, made once and shared.</summary>
    public static Plan For(int n)
    {
        if (n < 1 || (n & (n - 1)) != 0) throw new ArgumentException($"FFT length must be a power of two but got {n}");
        return Plans.GetOrAdd(n, static m => new Plan(m));
    }

    /// <summary>Forward (e^(−2πikn/N)) or inverse (e^(+2πikn/N), divided by N) transform of re + i·im, in place.</summary>
    public static void Transform(double[] re, double[] im, bool forward)
    {
        var n = re.Length;
        if (n != im.Length) throw new ArgumentException($"FFT length must be a power of two but got {n} real and {im.Length} imaginary values");
        Transform(re.AsSpan(), im.AsSpan(), forward, For(n));
        if (!forward)
        {
            var inv = 1.0 / n;
            for (var i = 0; i < n; i++)
            {
                re[i] *= inv;
                im[i] *= inv;
            }
        }
    }

    /// <summary>Unnormalised transform with a plan of the right length.</summary>
    public static void Transform(Span<double> re, Span<double> im, bool forward, Plan plan)
    {
        var n = plan.N;
        var swaps = plan.Swaps;
        for (var s = 0; s < swaps.Length; s += 2)
        {
            int i = swaps[s], j = swaps[s + 1];
            (re[i], re[j]) = (re[j], re[i]);
            (im[i], im[j]) = (im[j], im[i]);
        }

        var cos = plan.Cos;
        var sin = plan.Sin;
        var sign = forward ? 1.0 : -1.0;
        for (var size = 2; size <= n; size <<= 1)
        {
            var half = size >> 1;
            var stride = n / size;
            for (var start = 0; start < n; start += size)
            {
                for (var k = 0; k < half; k++)
                {
                    var wr = cos[k * stride];
                    var wi = sign * sin[k * stride];
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
