using MathNet.Numerics;

namespace OrderUnfold.Io;

/// <summary>One stretch of a trace over which the recorded ramp moves one way: samples [Start, Start + Count).</summary>
internal readonly record struct RampSegment(int Start, int Count, RampDirection Direction, double Excursion)
{
    public int End => Start + Count;
}

/// <summary>
/// Cuts a recorded ramp (triangle, sawtooth or single ramp) into one-way segments, and turns a noisy recorded
/// ramp voltage into a strictly monotone axis.
/// </summary>
internal static class RampSegments
{
    /// <summary>A turn counts once the ramp has come back by this fraction of its span (hysteresis).</summary>
    public const double TurnFraction = 0.05;

    /// <summary>Segments shorter than this fraction of the longest one (flybacks, partial ends) are dropped.</summary>
    public const double MinLengthFraction = 0.2;

    /// <summary>Fewest samples a segment needs to become a sweep.</summary>
    public const int MinSamples = 16;

    /// <summary>A ramp whose smoothed span is below this many noise standard deviations counts as constant.</summary>
    private const double MinSpanInNoise = 8;

    /// <summary>
    /// Finds the one-way segments of a ramp. The ramp is smoothed (moving median, then moving mean, over a
    /// window of about 1 % of the record, at most 51 samples) so that ADC steps and noise do not create turns;
    /// a turn is a running extremum from which the smoothed ramp has come back by <see cref="TurnFraction"/> of
    /// its span. Segments that move less than that, have fewer than <see cref="MinSamples"/> samples, or are
    /// shorter than <see cref="MinLengthFraction"/> of the longest are dropped.
    /// </summary>
    /// <exception cref="RampConstantException">The ramp does not move beyond its noise.</exception>
    public static List<RampSegment> Find(double[] ramp)
    {
        int n = ramp.Length;
        double rawMin = ramp.Min(), rawMax = ramp.Max();
        double scale = Math.Max(Math.Abs(rawMin), Math.Abs(rawMax));
        if (!(rawMax - rawMin > 1e-12 * scale)) throw new RampConstantException(rawMax - rawMin, 0);

        int window = SmoothingWindow(n);
        var smooth = MovingMean(MovingMedian(ramp, window), window);
        double min = smooth.Min(), max = smooth.Max(), span = max - min;
        var residual = new double[n];
        for (int i = 0; i < n; i++) residual[i] = Math.Abs(ramp[i] - smooth[i]);
        double sigma = 1.4826 * Medians.OfFinite(residual);
        if (!(span > MinSpanInNoise * sigma) || !(span > 1e-12 * scale)) throw new RampConstantException(span, sigma);

        var turns = Turns(smooth, TurnFraction * span);
        var bounds = new List<int> { 0 };
        bounds.AddRange(turns);
        bounds.Add(n);

        var all = new List<RampSegment>();
        for (int k = 0; k + 1 < bounds.Count; k++)
        {
            int a = bounds[k], b = bounds[k + 1];
            if (b - a < 2) continue;
            double change = smooth[b - 1] - smooth[a];
            all.Add(new RampSegment(a, b - a, change > 0 ? RampDirection.Up : RampDirection.Down, Math.Abs(change)));
        }

        var moving = all.Where(s => s.Excursion >= TurnFraction * span).ToList();
        if (moving.Count == 0) return moving;
        int longest = moving.Max(s => s.Count);
        return moving.Where(s => s.Count >= MinLengthFraction * longest && s.Count >= MinSamples).ToList();
    }

    /// <summary>
    /// Indices of the turning points: extrema of the smoothed ramp with a move of at least
    /// <paramref name="hysteresis"/> on both sides. Until the ramp has first moved that far from its running
    /// minimum or maximum the direction is unknown; a wiggle smaller than that at the start stays part of the
    /// first segment (as one at the end stays part of the last).
    /// </summary>
    internal static List<int> Turns(double[] s, double hysteresis)
    {
        var turns = new List<int>();
        int dir = 0;
        double lo = s[0], hi = s[0], ext = s[0];
        int extI = 0;
        for (int i = 1; i < s.Length; i++)
        {
            double v = s[i];
            if (dir == 0)
            {
                hi = Math.Max(hi, v);
                lo = Math.Min(lo, v);
                if (v - lo >= hysteresis) dir = 1;
                else if (hi - v >= hysteresis) dir = -1;
                if (dir != 0) { ext = v; extI = i; }
            }
            else if (dir > 0)
            {
                if (v > ext) { ext = v; extI = i; }
                else if (ext - v >= hysteresis)
                {
                    turns.Add(extI);
                    dir = -1; ext = v; extI = i;
                }
            }
            else
            {
                if (v < ext) { ext = v; extI = i; }
                else if (v - ext >= hysteresis)
                {
                    turns.Add(extI);
                    dir = 1; ext = v; extI = i;
                }
            }
        }
        return turns;
    }

    /// <summary>
    /// A strictly monotone version of a recorded ramp segment. Noisy recorded ramps are smoothed to a monotone
    /// function of the sample index: the ramp voltage is fitted by least squares as a cubic in the sample
    /// index, and when that cubic is not strictly monotone over the segment (in <paramref name="direction"/>),
    /// as a straight line. The drive behind a recorded ramp is a smooth function of time, so the fit keeps
    /// the shape of the ramp and removes the noise and ADC steps that made the record go back and forth.
    /// Sorting the samples instead would pair signal samples with the wrong voltages.
    /// </summary>
    /// <returns>The fitted voltages, or null when even the straight line does not move in <paramref name="direction"/>.</returns>
    public static double[]? MonotoneFit(ReadOnlySpan<double> v, RampDirection direction)
    {
        int m = v.Length;
        if (m < 2) return null;
        double sign = direction == RampDirection.Down ? -1 : 1;
        var t = new double[m];
        for (int i = 0; i < m; i++) t[i] = (2.0 * i - (m - 1)) / (m - 1);
        var y = v.ToArray();

        if (m >= 8)
        {
            var p = Fit.Polynomial(t, y, 3);
            var cubic = t.Select(ti => ((p[3] * ti + p[2]) * ti + p[1]) * ti + p[0]).ToArray();
            if (IsStrictlyMonotone(cubic, sign)) return cubic;
        }

        var (a, b) = Fit.Line(t, y);
        if (!(sign * b > 0)) return null;
        var line = t.Select(ti => a + b * ti).ToArray();
        return IsStrictlyMonotone(line, sign) ? line : null;
    }

    /// <summary>True when every step of <paramref name="v"/> has the sign of <paramref name="sign"/> (no zero steps).</summary>
    public static bool IsStrictlyMonotone(ReadOnlySpan<double> v, double sign)
    {
        for (int i = 1; i < v.Length; i++)
            if (!(sign * (v[i] - v[i - 1]) > 0)) return false;
        return true;
    }

    /// <summary>Odd smoothing window: about 1 % of the record, between 1 and 51 samples.</summary>
    internal static int SmoothingWindow(int n)
    {
        int w = Math.Clamp(n / 100, 1, 51);
        return w % 2 == 1 ? w : w + 1;
    }

    /// <summary>Moving median over a centred window that shrinks symmetrically at the ends.</summary>
    internal static double[] MovingMedian(double[] x, int window)
    {
        int n = x.Length, half = window / 2;
        var result = new double[n];
        if (half == 0)
        {
            Array.Copy(x, result, n);
            return result;
        }
        var sorted = new List<double>(window + 2);
        int lo = 0, hi = -1; // current window is x[lo..hi]
        for (int i = 0; i < n; i++)
        {
            int h = Math.Min(half, Math.Min(i, n - 1 - i));
            int a = i - h, b = i + h;
            while (hi < b) Insert(sorted, x[++hi]);
            while (lo < a) Remove(sorted, x[lo++]);
            int c = sorted.Count;
            result[i] = c % 2 == 1 ? sorted[c / 2] : 0.5 * (sorted[c / 2 - 1] + sorted[c / 2]);
        }
        return result;
    }

    /// <summary>Moving mean over a centred window that shrinks symmetrically at the ends (unbiased on a straight ramp).</summary>
    internal static double[] MovingMean(double[] x, int window)
    {
        int n = x.Length, half = window / 2;
        var prefix = new double[n + 1];
        for (int i = 0; i < n; i++) prefix[i + 1] = prefix[i] + x[i];
        var result = new double[n];
        for (int i = 0; i < n; i++)
        {
            int h = Math.Min(half, Math.Min(i, n - 1 - i));
            result[i] = (prefix[i + h + 1] - prefix[i - h]) / (2 * h + 1);
        }
        return result;
    }

    private static void Insert(List<double> sorted, double v)
    {
        int k = sorted.BinarySearch(v);
        sorted.Insert(k >= 0 ? k : ~k, v);
    }

    private static void Remove(List<double> sorted, double v)
    {
        int k = sorted.BinarySearch(v);
        sorted.RemoveAt(k);
    }

}

/// <summary>The ramp does not move (beyond its noise); turned into an <see cref="InputException"/> by the caller.</summary>
internal sealed class RampConstantException(double span, double noise) : Exception("ramp is constant")
{
    public double Span { get; } = span;
    public double Noise { get; } = noise;
}
