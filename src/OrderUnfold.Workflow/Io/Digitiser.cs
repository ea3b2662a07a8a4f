using MathNet.Numerics;

namespace OrderUnfold.Io;

/// <summary>
/// Facts about the digitiser that recorded a signal, read from the values themselves: the quantisation step (LSB)
/// when the values sit on an evenly spaced grid, and the samples clipped at full scale.
/// </summary>
/// <remarks>
/// Both are decided conservatively: a step is claimed only when every distinct value of the record lies on one grid
/// that is much coarser than the resolution the numbers were printed with, and clipping only when a run at the
/// record's highest or lowest value is longer than the noise or the peak's own shape allows.
/// </remarks>
public static class Digitiser
{
    /// <summary>Fewest distinct values for a grid to count as evidence: with fewer, any set of values fits some grid.</summary>
    public const int MinDistinctValues = 16;

    /// <summary>A grid step must be at least this many times the printing resolution of the numbers (else the grid
    /// is only the number of decimals written, not a digitiser).</summary>
    public const double MinStepInResolution = 10;

    /// <summary>Largest distance of a value from the grid, as a fraction of the step (plus the printing resolution).</summary>
    public const double GridTolerance = 0.1;

    /// <summary>A run at the extreme value counts as clipped when its probability under the noise alone is below this.</summary>
    public const double ClipRunProbability = 1e-6;

    /// <summary>Shortest run at the extreme value that can count as clipped.</summary>
    public const int MinClipRun = 3;

    /// <summary>
    /// The quantisation step of <paramref name="values"/>, or null when they do not sit on one evenly spaced grid.
    /// <para>
    /// The distinct values are sorted; the grid index of each follows from the gap to the one before, divided by the
    /// step as estimated so far (least squares of value against index over the values already placed, starting from
    /// the smallest gap), so rounded printing (0.0039 and 0.00391 for a step of 0.00390625) does not accumulate. A step
    /// is returned when at least <see cref="MinDistinctValues"/> distinct values exist, the step is at least
    /// <see cref="MinStepInResolution"/> times the printing resolution (the finest decimal any value was written
    /// with), and every value lies within <see cref="GridTolerance"/> of a step (plus that resolution) of the grid.
    /// </para>
    /// </summary>
    public static double? QuantisationStep(IReadOnlyList<double> values)
    {
        ArgumentNullException.ThrowIfNull(values);
        var distinct = values.Where(double.IsFinite).Distinct().Order().ToArray();
        if (distinct.Length < MinDistinctValues) return null;

        var resolution = PrintedResolution(distinct);
        var gap = double.PositiveInfinity;
        for (var i = 1; i < distinct.Length; i++) gap = Math.Min(gap, distinct[i] - distinct[i - 1]);
        if (!(gap >= MinStepInResolution * resolution) || !(gap > 0)) return null;

        // Place each value on the grid from its gap to the previous one, with the step refined as values are placed.
        var k = new double[distinct.Length];
        double step = gap, sk = 0, skk = 0, sv = 0, skv = 0;
        var v0 = distinct[0];
        for (var i = 0; i < distinct.Length; i++)
        {
            if (i > 0) k[i] = k[i - 1] + Math.Max(1, Math.Round((distinct[i] - distinct[i - 1]) / step));
            var v = distinct[i] - v0;
            sk += k[i];
            skk += k[i] * k[i];
            sv += v;
            skv += k[i] * v;
            var count = i + 1;
            var det = count * skk - sk * sk;
            if (count >= 2 && det > 0)
            {
                var s = (count * skv - sk * sv) / det;
                if (s > 0) step = s;
            }
        }

        var intercept = (sv - step * sk) / distinct.Length;
        var tolerance = GridTolerance * step + resolution;
        for (var i = 0; i < distinct.Length; i++)
            if (Math.Abs(distinct[i] - v0 - intercept - k[i] * step) > tolerance) return null;
        return step;
    }

    /// <summary>
    /// Indices (ascending) of the samples at a clipping level: the record's highest or lowest value, when a run of
    /// samples at it is longer than the signal allows without clipping. Two tests, either of which decides:
    /// <list type="bullet">
    /// <item>noise: with noise σ (from the median absolute deviation of the sample-to-sample differences) and step q
    /// (<paramref name="step"/>, else the printing resolution), two neighbouring samples of one true level fall on the
    /// same value with probability at most erf(q / 2σ); a run of k samples at the extreme is clipped when that
    /// probability to the power k − 1 is below <see cref="ClipRunProbability"/>;</item>
    /// <item>shape: a peak (or dip) whose top is rounded to one value holds that value over about W·√(q/H) samples,
    /// W its width at half its height H above the record's median; a run at the extreme longer than twice that plus
    /// two samples is a flattened top.</item>
    /// </list>
    /// Runs shorter than <see cref="MinClipRun"/> never decide. Once a level is found to clip, every sample at it is
    /// returned (the true signal there is at or beyond full scale).
    /// </summary>
    public static int[] ClippedSamples(IReadOnlyList<double> values, double? step)
    {
        ArgumentNullException.ThrowIfNull(values);
        var n = values.Count;
        if (n < MinClipRun) return [];
        var y = values.ToArray();
        if (y.Any(v => !double.IsFinite(v))) return [];
        double max = y.Max(), min = y.Min();
        if (!(max > min)) return [];

        var q = step ?? PrintedResolution(y.Distinct().Take(4096).ToArray());
        var sigma = DifferenceNoise(y);
        var stay = sigma > 0 ? SpecialFunctions.Erf(q / (2 * sigma)) : 1.0;
        var median = Medians.OfFinite(y);

        var result = new List<int>();
        foreach (var (level, top) in new[] { (max, true), (min, false) })
        {
            var height = top ? level - median : median - level;
            var clipped = false;
            for (var i = 0; i < n && !clipped; i++)
            {
                if (y[i] != level || (i > 0 && y[i - 1] == level)) continue;
                var end = i;
                while (end < n && y[end] == level) end++;
                var run = end - i;
                if (run < MinClipRun) continue;
                if (Math.Pow(stay, run - 1) < ClipRunProbability) clipped = true;
                else if (height > 0 && q > 0)
                {
                    var half = top ? median + height / 2 : median - height / 2;
                    int left = i, right = end;
                    while (left > 0 && (top ? y[left - 1] > half : y[left - 1] < half)) left--;
                    while (right < n && (top ? y[right] > half : y[right] < half)) right++;
                    var natural = (right - left) * Math.Sqrt(q / height);
                    if (run > 2 * natural + 2) clipped = true;
                }
            }

            if (!clipped) continue;
            for (var i = 0; i < n; i++)
                if (y[i] == level) result.Add(i);
        }

        result.Sort();
        return result.Distinct().ToArray();
    }

    /// <summary>The finest decimal resolution the values were written with: 10⁻ᵈ for the largest number d of decimals
    /// any of them needs (up to 15; numbers computed rather than printed give about 1e-15 of their size).</summary>
    internal static double PrintedResolution(IReadOnlyList<double> values)
    {
        var finest = 0.0;
        foreach (var v in values)
        {
            if (v == 0 || !double.IsFinite(v)) continue;
            var magnitude = Math.Abs(v);
            var exponent = (int)Math.Floor(Math.Log10(magnitude));
            double r = 0;
            for (var d = -exponent; d <= 15 - exponent; d++)
            {
                var scaled = magnitude * Math.Pow(10, d);
                if (Math.Abs(scaled - Math.Round(scaled)) <= 1e-9 * scaled)
                {
                    r = Math.Pow(10, -d);
                    break;
                }
            }

            if (r == 0) r = magnitude * 1e-15;
            finest = finest == 0 ? r : Math.Min(finest, r);
        }

        return finest;
    }

    /// <summary>Noise σ from the sample-to-sample differences: 1.4826·MAD(Δy)/√2 (robust against peaks and steps).</summary>
    private static double DifferenceNoise(double[] y)
    {
        var d = new double[y.Length - 1];
        for (var i = 1; i < y.Length; i++) d[i - 1] = y[i] - y[i - 1];
        var m = Medians.OfFinite(d);
        for (var i = 0; i < d.Length; i++) d[i] = Math.Abs(d[i] - m);
        return 1.4826 * Medians.OfFinite(d) / Math.Sqrt(2);
    }

}
