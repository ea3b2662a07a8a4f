namespace OrderUnfold.Numerics;

/// <summary>The noise of one recorded signal, estimated from the data themselves.</summary>
public sealed record NoiseEstimate
{
    /// <summary>Noise σ to weight the whole sweep with (signal units): the root mean of the per-sample variances, so that a
    /// correct model gives a reduced χ² near 1 even when the noise grows with the signal.</summary>
    public required double Sigma { get; init; }

    /// <summary>Noise σ at the sweep's dark level (signal units).</summary>
    public required double SigmaBaseline { get; init; }

    /// <summary>The digitiser step (LSB) the values sit on, when they sit on one; null for continuous values.</summary>
    public double? QuantisationStep { get; init; }

    /// <summary>Growth of the noise variance with the signal above the dark level (signal units: σ² = σ₀² + k·(y − y₀));
    /// 0 when the data show no signal-dependent noise.</summary>
    public double VarianceSlope { get; init; }

    /// <summary>How the value was obtained, in words (for the report).</summary>
    public required string Method { get; init; }
}

/// <summary>
/// Noise of a sampled signal from its fourth-order differences
/// eᵢ = yᵢ₋₂ − 4yᵢ₋₁ + 6yᵢ − 4yᵢ₊₁ + yᵢ₊₂: smooth structure (a drifting baseline, the flanks and tops of peaks sampled
/// with several points per width) cancels to fourth order, while white noise of variance σ² gives Var(e) = 70σ²
/// (the sum of the squared binomial coefficients 1, 4, 6, 4, 1). The variance is a clipped mean of e² (iterated 4σ
/// clipping), not a median: on 8-bit scope data the differences take a few discrete values and a median of them is
/// biased by up to ±20 %, whereas a mean square counts the quantisation noise (LSB²/12 for a signal spread over
/// several steps) as it is. Where the data show noise growing with the signal (shot noise, intensity noise), the
/// variance is fitted as σ² = σ₀² + k·(level − dark level) over bins of the local level, and the sweep's σ is the root
/// mean of the per-sample variances.
/// </summary>
public static class NoiseEstimator
{
    private const double SumSquaredBinomial = 70.0;
    private const double ClipSigmas = 4.0;
    private const int LevelBins = 8;

    /// <summary>Estimates the noise of <paramref name="y"/>; <paramref name="quantisationStep"/> is the digitiser step
    /// when the reader knows it (detected from the values otherwise).</summary>
    public static NoiseEstimate Estimate(IReadOnlyList<double> y, double? quantisationStep = null)
    {
        var n = y.Count;
        var q = quantisationStep ?? DetectStep(y);
        if (n < 8)
        {
            var fallback = q is double qq ? qq / Math.Sqrt(12) : 0;
            return new NoiseEstimate { Sigma = fallback, SigmaBaseline = fallback, QuantisationStep = q, Method = "too few samples: quantisation floor only" };
        }

        var e = new double[n - 4];
        var level = new double[n - 4];
        for (var i = 2; i < n - 2; i++)
        {
            e[i - 2] = y[i - 2] - 4 * y[i - 1] + 6 * y[i] - 4 * y[i + 1] + y[i + 2];
            level[i - 2] = (y[i - 2] + y[i - 1] + y[i] + y[i + 1] + y[i + 2]) / 5;
        }

        var all = Enumerable.Range(0, e.Length).ToArray();
        var sigmaAll = ClippedSigma(e, all);
        var floor = q is double step ? step / Math.Sqrt(12) : 0;

        // signal dependence: variance in bins of the local level above the dark level
        var order = all.OrderBy(i => level[i]).ToArray();
        var dark = level[order[order.Length / 5]];
        var darkIdx = order.Take(Math.Max(8, order.Length / 2)).ToArray();
        var sigmaDark = Math.Max(ClippedSigma(e, darkIdx), floor);
        var slope = SignalSlope(e, level, order, dark, sigmaDark);

        double sigma;
        string method;
        if (slope > 0)
        {
            var sum = 0.0;
            for (var i = 0; i < n; i++) sum += sigmaDark * sigmaDark + slope * Math.Max(0, y[i] - dark);
            sigma = Math.Sqrt(sum / n);
            method = "fourth differences, clipped mean square; variance grows with the signal (fitted over level bins)";
        }
        else
        {
            sigma = Math.Max(sigmaAll, floor);
            method = "fourth differences, clipped mean square";
        }

        if (q is not null) method += $"; values on a digitiser step of {q.Value:G4} (quantisation floor step/√12)";
        return new NoiseEstimate { Sigma = sigma, SigmaBaseline = sigmaDark, QuantisationStep = q, VarianceSlope = slope, Method = method };
    }

    /// <summary>
    /// A quick, robust noise σ for peak thresholds and fit weights inside the calibration: 1.4826·median|Δy|/√2 from the
    /// first differences (the upper median; robust to peaks, which occupy few samples), floored at the smallest non-zero
    /// step / √12 when the signal is quantised. It differs from <see cref="Estimate"/> (fourth differences, clipped mean
    /// square, signal-dependent variance) on quantised and shot-noise-limited data; the peak finder's thresholds and the
    /// calibration fits were set against it (field traces 01–08), so it stays their estimate, while <see cref="Estimate"/>
    /// gives the σ that weights the unfolding's χ².
    /// </summary>
    public static double FirstDifferenceSigma(IReadOnlyList<double> y)
    {
        if (y.Count < 3) return 0;
        var d = new double[y.Count - 1];
        var minStep = double.PositiveInfinity;
        for (var i = 0; i < d.Length; i++)
        {
            d[i] = Math.Abs(y[i + 1] - y[i]);
            if (d[i] > 0 && d[i] < minStep) minStep = d[i];
        }

        var sigma = 1.4826 * Medians.Upper(d) / Math.Sqrt(2);
        var floor = double.IsFinite(minStep) ? minStep / Math.Sqrt(12) : 0;
        return Math.Max(sigma, floor);
    }

    /// <summary>σ of white noise from the fourth differences at <paramref name="idx"/>: iterated 4σ-clipped mean square / 70.</summary>
    private static double ClippedSigma(double[] e, int[] idx)
    {
        if (idx.Length == 0) return 0;
        var s = Math.Sqrt(idx.Average(i => e[i] * e[i]));
        if (s == 0) return 0;
        for (var iter = 0; iter < 30; iter++)
        {
            var limit = ClipSigmas * s;
            double ss = 0;
            var kept = 0;
            foreach (var i in idx)
            {
                if (Math.Abs(e[i]) > limit) continue;
                ss += e[i] * e[i];
                kept++;
            }

            if (kept == 0) break;
            // a normal variable clipped at ±4σ keeps 99.89 % of its variance (1 − 8φ(4)/(2Φ(4) − 1))
            var next = Math.Sqrt(ss / kept / 0.99893);
            if (Math.Abs(next - s) <= 1e-6 * s) { s = next; break; }
            s = next;
        }

        return s / Math.Sqrt(SumSquaredBinomial);
    }

    /// <summary>Slope k of σ² = σ₀² + k·(level − dark) over bins of the local level, or 0 when the data do not show it
    /// clearly (the top bin's variance below twice the dark variance, or a slope under 4 standard errors).</summary>
    private static double SignalSlope(double[] e, double[] level, int[] order, double dark, double sigmaDark)
    {
        // bins over the upper half of the levels (the lower half is the dark part of a line spectrum)
        var upper = order.Skip(order.Length / 2).Where(i => level[i] - dark > 10 * sigmaDark).ToArray();
        if (upper.Length < LevelBins * 30) return 0;
        var xs = new List<double>();
        var vs = new List<double>();
        var ws = new List<double>();
        var per = upper.Length / LevelBins;
        for (var b = 0; b < LevelBins; b++)
        {
            var idx = upper.Skip(b * per).Take(b == LevelBins - 1 ? upper.Length - b * per : per).ToArray();
            var s = ClippedSigma(e, idx);
            xs.Add(idx.Average(i => level[i]) - dark);
            vs.Add(s * s);
            ws.Add(idx.Length);
        }

        var v0 = sigmaDark * sigmaDark;
        if (vs[^1] < 2 * v0) return 0;
        // weighted least squares of (v − v0) = k·x through the origin; variance of a sample variance ≈ 2v²/N
        double sxy = 0, sxx = 0;
        for (var b = 0; b < xs.Count; b++)
        {
            var w = ws[b] / (2 * vs[b] * vs[b]);
            sxy += w * xs[b] * (vs[b] - v0);
            sxx += w * xs[b] * xs[b];
        }

        if (sxx <= 0) return 0;
        var k = sxy / sxx;
        var se = 1 / Math.Sqrt(sxx);
        return k > 4 * se ? k : 0;
    }

    /// <summary>The step the values sit on (a digitiser's LSB), or null when they do not sit on one: the smallest gap
    /// between distinct values, accepted when at least 95 % of the gaps are whole multiples of it (within 5 % of a step) and the
    /// values span at most 2²⁰ steps.</summary>
    public static double? DetectStep(IReadOnlyList<double> y)
    {
        var distinct = y.Where(double.IsFinite).Distinct().OrderBy(v => v).ToArray();
        if (distinct.Length < 3) return null;
        var gaps = new double[distinct.Length - 1];
        for (var i = 0; i < gaps.Length; i++) gaps[i] = distinct[i + 1] - distinct[i];
        var q = gaps.Min();
        if (!(q > 0) || (distinct[^1] - distinct[0]) / q > (1 << 20)) return null;
        // rounding in the export makes equal steps differ in the last digits: take the median of the near-smallest gaps
        q = Medians.Upper(gaps.Where(g => g < 1.5 * q));
        var onGrid = gaps.Count(g => Math.Abs(g / q - Math.Round(g / q)) < 0.05);
        return onGrid >= 0.95 * gaps.Length ? q : null;
    }
}
