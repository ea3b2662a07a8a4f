namespace OrderUnfold.Numerics;

/// <summary>A transmission peak found in a sweep.</summary>
/// <param name="Position">Sub-sample position as a fractional sample index.</param>
/// <param name="X">Scan coordinate at the peak (interpolated).</param>
/// <param name="Height">Height above the baseline.</param>
/// <param name="WidthSamples">Full width at half maximum in samples (interpolated).</param>
public sealed record Peak(double Position, double X, double Height, double WidthSamples);

/// <summary>
/// Finds peaks in a sampled signal: regions above half of the local height, located to sub-sample
/// precision by the centroid of the part above half maximum, with the FWHM from linear interpolation
/// of the half-maximum crossings. Robust to 8-bit quantisation (flat tops) where a three-point parabola is not.
/// </summary>
public static class PeakFinder
{
    /// <summary>Finds peaks whose height above baseline exceeds <paramref name="minHeightFraction"/> of the largest
    /// and <paramref name="minSnr"/> times the noise.</summary>
    public static IReadOnlyList<Peak> Find(IReadOnlyList<double> x, IReadOnlyList<double> y, double minHeightFraction = 0.2, double minSnr = 5)
    {
        var n = y.Count;
        if (n < 3) return [];
        var baseline = Percentile(y, 0.05);
        var max = y.Max() - baseline;
        var noise = NoiseEstimator.FirstDifferenceSigma(y);
        if (!(max > 0)) return [];
        var threshold = Math.Max(minHeightFraction * max, minSnr * noise);
        var peaks = new List<Peak>();
        var i = 0;
        while (i < n)
        {
            if (y[i] - baseline <= threshold)
            {
                i++;
                continue;
            }

            // region above threshold
            var start = i;
            while (i < n && y[i] - baseline > threshold) i++;
            var end = i - 1;
            if (start == 0 || end == n - 1) continue; // cut by the record edge: position would be biased
            var top = start;
            for (var k = start; k <= end; k++) if (y[k] > y[top]) top = k;
            var height = y[top] - baseline;
            var half = baseline + 0.5 * height;
            var lo = top;
            while (lo > 0 && y[lo - 1] > half) lo--;
            var hi = top;
            while (hi < n - 1 && y[hi + 1] > half) hi++;
            if (lo == 0 || hi == n - 1) continue;
            // interpolated half-maximum crossings
            var left = lo - 1 + (half - y[lo - 1]) / (y[lo] - y[lo - 1]);
            var right = hi + (y[hi] - half) / (y[hi] - y[hi + 1]);
            double sw = 0, swx = 0;
            for (var k = lo; k <= hi; k++)
            {
                var w = y[k] - half;
                sw += w;
                swx += w * k;
            }

            var pos = sw > 0 ? swx / sw : top;
            peaks.Add(new Peak(pos, Interpolate(x, pos), height, right - left));
            i = Math.Max(i, hi + 1);
        }

        return peaks;
    }

    /// <summary>Linear interpolation of x at a fractional index.</summary>
    public static double Interpolate(IReadOnlyList<double> x, double position)
    {
        var i = (int)Math.Floor(position);
        if (i < 0) return x[0];
        if (i >= x.Count - 1) return x[^1];
        var t = position - i;
        return x[i] + t * (x[i + 1] - x[i]);
    }

    /// <summary>The <paramref name="p"/>-quantile (0–1) of <paramref name="y"/> by linear interpolation between order statistics.</summary>
    public static double Percentile(IReadOnlyList<double> y, double p)
    {
        var a = y.ToArray();
        Array.Sort(a);
        var k = Math.Clamp((int)Math.Round(p * (a.Length - 1)), 0, a.Length - 1);
        return a[k];
    }
}
