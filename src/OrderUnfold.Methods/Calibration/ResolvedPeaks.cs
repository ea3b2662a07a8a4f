namespace OrderUnfold.Calibration;

/// <summary>
/// Finds peaks that overlap: every local maximum whose prominence (height above the higher of the two lowest
/// points that separate it from taller ground on either side) clears the threshold is a peak, even when it
/// sits on the flank of a neighbour. <see cref="PeakFinder"/> returns one peak per region above its threshold,
/// which merges lines a few linewidths apart; self-calibration needs each of them.
/// </summary>
/// <remarks>
/// The position is the centroid of the part of the peak above a level halfway between its top and its higher
/// saddle (half maximum for an isolated peak); the width is the full width at half height above the baseline,
/// measured between the saddles (from one side, doubled, when a neighbour hides the other crossing). A blended
/// peak's position is biased by its neighbour, but its repeat one FSR later is blended the same way, so the
/// bias cancels in a repeat pair.
/// </remarks>
public static class ResolvedPeaks
{
    /// <summary>Peaks higher than <paramref name="minHeightFraction"/> of the tallest and <paramref name="minSnr"/> noise σ,
    /// with a prominence of at least half that threshold.</summary>
    public static IReadOnlyList<Peak> Find(IReadOnlyList<double> x, IReadOnlyList<double> y, double minHeightFraction = 0.05, double minSnr = 6)
    {
        var n = y.Count;
        if (n < 5) return [];
        var baseline = PeakFinder.Percentile(y, 0.05);
        var noise = NoiseEstimator.FirstDifferenceSigma(y);
        var top = y.Max() - baseline;
        if (!(top > 0)) return [];
        var threshold = Math.Max(minHeightFraction * top, minSnr * noise);
        var minProminence = Math.Max(0.5 * threshold, minSnr * noise);

        var s = new double[n];
        s[0] = y[0];
        s[n - 1] = y[n - 1];
        for (var i = 1; i < n - 1; i++) s[i] = (y[i - 1] + y[i] + y[i + 1]) / 3;

        var peaks = new List<Peak>();
        var i0 = 1;
        while (i0 < n - 1)
        {
            if (s[i0] - baseline <= threshold || s[i0] < s[i0 - 1])
            {
                i0++;
                continue;
            }

            // plateau: the run of equal values starting here
            var j = i0;
            while (j + 1 < n && s[j + 1] == s[i0]) j++;
            if (j + 1 >= n || s[j + 1] > s[i0])
            {
                i0 = j + 1;
                continue;
            }

            var m = (i0 + j) / 2;
            i0 = j + 1;
            var (leftMin, leftPos, leftEdge) = Walk(s, m, -1);
            var (rightMin, rightPos, rightEdge) = Walk(s, m, +1);
            var saddle = Math.Max(leftMin, rightMin);
            if (s[m] - saddle < minProminence) continue;
            var peak = Measure(x, y, m, baseline, saddle, leftPos, rightPos, leftEdge, rightEdge);
            if (peak is not null) peaks.Add(peak);
        }

        return peaks;
    }

    /// <summary>Lowest point between m and the first point higher than s[m] in one direction (or the record edge).</summary>
    private static (double Min, int Pos, bool Edge) Walk(double[] s, int m, int dir)
    {
        var min = s[m];
        var pos = m;
        var k = m + dir;
        while (k >= 0 && k < s.Length && s[k] <= s[m])
        {
            if (s[k] < min)
            {
                min = s[k];
                pos = k;
            }

            k += dir;
        }

        return (min, pos, k < 0 || k >= s.Length);
    }

    private static Peak? Measure(IReadOnlyList<double> x, IReadOnlyList<double> y, int m, double baseline, double saddle, int leftPos, int rightPos,
        bool leftEdge, bool rightEdge)
    {
        var n = y.Count;
        // true top near the smoothed maximum
        var topIndex = m;
        for (var k = Math.Max(leftPos, m - 2); k <= Math.Min(rightPos, m + 2); k++) if (y[k] > y[topIndex]) topIndex = k;
        var yTop = y[topIndex];
        var height = yTop - baseline;
        if (!(height > 0)) return null;
        var half = baseline + 0.5 * height;

        // a peak whose flank runs into the record edge before reaching half height would be mislocated
        if (leftEdge && leftPos == 0 && y[0] > half) return null;
        if (rightEdge && rightPos == n - 1 && y[n - 1] > half) return null;

        // centroid above the level halfway between the top and the higher saddle
        var level = Math.Max(half, 0.5 * (yTop + saddle));
        var lo = topIndex;
        while (lo - 1 > leftPos && y[lo - 1] > level) lo--;
        var hi = topIndex;
        while (hi + 1 < rightPos && y[hi + 1] > level) hi++;
        if (lo <= 0 || hi >= n - 1) return null;
        double sw = 0, swx = 0;
        for (var k = lo; k <= hi; k++)
        {
            var w = y[k] - level;
            if (w <= 0) continue;
            sw += w;
            swx += w * k;
        }

        var pos = sw > 0 ? swx / sw : topIndex;

        // FWHM above the baseline, between the saddles
        double? left = null, right = null;
        for (var k = topIndex; k > leftPos; k--)
        {
            if (y[k - 1] <= half)
            {
                left = k - 1 + (half - y[k - 1]) / (y[k] - y[k - 1]);
                break;
            }
        }

        for (var k = topIndex; k < rightPos; k++)
        {
            if (y[k + 1] <= half)
            {
                right = k + (y[k] - half) / (y[k] - y[k + 1]);
                break;
            }
        }

        double width;
        if (left is double l && right is double r) width = r - l;
        else if (left is double l2) width = 2 * (pos - l2);
        else if (right is double r2) width = 2 * (r2 - pos);
        else width = rightPos - leftPos;
        if (!(width > 0)) return null;
        return new Peak(pos, PeakFinder.Interpolate(x, pos), height, width);
    }
}
