namespace OrderUnfold.Calibration;

/// <summary>A starting axis for the self-calibration from the sweep's own local autocorrelation.</summary>
internal static class CorrelationStart
{
    /// <summary>
    /// Local autocorrelation: windows of a twelfth of the sweep (at least 0.4 of the period the stated finesse
    /// suggests) are compared with the sweep at every lag in a range set by the peak widths and the stated finesse,
    /// by the similarity 2⟨u,v⟩/(|u|²+|v|²), which is 1 only for an exact repeat; each window's best lag (the shortest
    /// of its near-equal multiples) says where its content repeats. Those repeat positions are fitted like pairs.
    /// </summary>
    internal static (AxisPolynomial Axis, double RmsHz, double PeriodSamples) StartFromCorrelation(Sweep sweep, Instrument instrument, double period,
        double delta, double medianWidth, double? priorSamples = null)
    {
        var n = sweep.Count;
        var baseline = PeakFinder.Percentile(sweep.Y, 0.05);
        var z = new double[n];
        for (var i = 0; i < n; i++) z[i] = double.IsFinite(sweep.Y[i]) ? Math.Max(0, sweep.Y[i] - baseline) : 0;
        var cum = new double[n + 1];
        for (var i = 0; i < n; i++) cum[i + 1] = cum[i] + z[i] * z[i];

        // No prior on the period: neither the stated finesse nor the FSR in Hz says how many samples one period
        // spans. Every lag from a few peak widths to the end of the sweep is tried; the sums are strided by a
        // quarter of a peak width (and the best lag refined at full resolution), which bounds the cost.
        var stride = Math.Max(1, (int)Math.Floor(medianWidth / 4));
        var window = Math.Max(Math.Max(16, (int)(4 * medianWidth)), n / 12);
        var lagMin = Math.Max(4, (int)(3 * medianWidth));
        var lagMax = n - window - 1;
        if (priorSamples is double prior)
        {
            // a hint (from the stated finesse) narrows the search to 0.3–3.5 times it; only a further start, never a limit
            window = Math.Clamp(Math.Max(n / 12, (int)(0.4 * prior)), Math.Max(16, (int)(4 * medianWidth)), Math.Max(16, (int)(0.6 * prior)));
            lagMin = Math.Max(lagMin, (int)(0.3 * prior));
            lagMax = (int)Math.Min(n - window - 1, 3.5 * prior);
        }

        if (lagMax <= lagMin + 2) throw SelfCalibrator.NoRepeats(sweep, instrument, period, -1);
        var peakZ = z.Max();
        var step = Math.Max(1, window / 2);
        var xs = new List<(double XLo, double XHi, double Weight)>();
        var lagsFound = new List<double>();
        for (var a = 0; a + window + lagMin < n; a += step)
        {
            var energy = cum[a + window] - cum[a];
            var top = 0.0;
            for (var i = a; i < a + window; i++) top = Math.Max(top, z[i]);
            if (top < 0.15 * peakZ || !(energy > 0)) continue;
            var hi = Math.Min(lagMax, n - window - a);
            if (hi <= lagMin + 2) continue;
            var c = new double[hi + 2];
            double Similarity(int lag, int inner)
            {
                var s = 0.0;
                for (var i = a; i < a + window; i += inner) s += z[i] * z[i + lag];
                var e2 = cum[a + lag + window] - cum[a + lag];
                // 2⟨u,v⟩/(|u|²+|v|²): 1 only for equal content, lower for look-alikes of another height
                return e2 > 0 ? 2 * s * inner / (energy + e2) : 0;
            }

            for (var lag = lagMin; lag <= hi; lag += stride) c[lag] = Similarity(lag, stride);
            var best = lagMin;
            for (var lag = lagMin; lag <= hi; lag += stride) if (c[lag] > c[best]) best = lag;
            if (c[best] < 0.3) continue;
            // the shortest lag that correlates almost as well: a whole multiple of the period correlates too
            for (var k = 4; k >= 2; k--)
            {
                var target = best / (double)k;
                if (target < lagMin) continue;
                var lo = Math.Max(lagMin, (int)(target * 0.96));
                var up = Math.Min(hi, (int)Math.Ceiling(target * 1.04));
                var m = lo;
                for (var lag = lo; lag <= up; lag++) if (c[lag] > c[m]) m = lag;
                if (c[m] >= 0.85 * c[best] && m > lagMin && m < hi)
                {
                    best = m;
                    break;
                }
            }

            if (stride > 1)
            {
                // refine at full resolution around the strided maximum
                var lo = Math.Max(lagMin, best - stride - 1);
                var up = Math.Min(hi, best + stride + 1);
                for (var lag = lo; lag <= up; lag++) c[lag] = Similarity(lag, 1);
                best = lo;
                for (var lag = lo; lag <= up; lag++) if (c[lag] > c[best]) best = lag;
            }

            if (c[best] < 0.35) continue;
            var refined = best;
            double frac = 0;
            if (best > lagMin && best < hi)
            {
                var den = c[best - 1] - 2 * c[best] + c[best + 1];
                if (den < 0) frac = Math.Clamp(0.5 * (c[best - 1] - c[best + 1]) / den, -0.5, 0.5);
            }

            // energy-weighted centre of the window's content
            double sw = 0, swi = 0;
            for (var i = a; i < a + window; i++)
            {
                sw += z[i] * z[i];
                swi += z[i] * z[i] * i;
            }

            var centre = swi / sw;
            var lagTrue = refined + frac;
            var x1 = PeakFinder.Interpolate(sweep.X, centre);
            var x2 = PeakFinder.Interpolate(sweep.X, Math.Min(n - 1, centre + lagTrue));
            xs.Add((Math.Min(x1, x2), Math.Max(x1, x2), c[best] * c[best]));
            lagsFound.Add(lagTrue);
        }

        if (xs.Count == 0) throw SelfCalibrator.NoRepeats(sweep, instrument, period, -1);

        // robust: the lag that the most windows agree on (within 8 %), weighted by how well each window repeats
        // (similarity⁴: a window whose repeat lies beyond the end of the sweep finds only a look-alike, at lower
        // similarity); windows whose lag disagrees with it are dropped
        var medLag = Enumerable.Range(0, xs.Count)
            .Select(i => (Lag: lagsFound[i], Support: Enumerable.Range(0, xs.Count).Where(j => Math.Abs(lagsFound[j] / lagsFound[i] - 1) < 0.08).Sum(j => xs[j].Weight * xs[j].Weight)))
            .MaxBy(t => t.Support).Lag;
        medLag = Medians.UpperOfFinite(Enumerable.Range(0, xs.Count).Where(i => Math.Abs(lagsFound[i] / medLag - 1) < 0.08).Select(i => lagsFound[i]));
        var keep = Enumerable.Range(0, xs.Count).Where(i => Math.Abs(lagsFound[i] / medLag - 1) < 0.08).ToList();
        if (keep.Count == 0) throw SelfCalibrator.NoRepeats(sweep, instrument, period, -1);
        var cands = keep.Select((i, k) => new RepeatConstraint(-1 - k, -1 - k, xs[i].XLo, xs[i].XHi, 1, 1, delta, 0.01 * period / Math.Sqrt(xs[i].Weight), "window")).ToList();
        var maxDegree = Math.Min(3, Math.Max(1, cands.Count - 2));
        RepeatAxisFit? bestFit = null;
        var bestBic = double.PositiveInfinity;
        var xLo = Math.Min(sweep.X[0], sweep.X[^1]);
        var xHi = Math.Max(sweep.X[0], sweep.X[^1]);
        for (var d = 1; d <= maxDegree; d++)
        {
            var f = RepeatAxisFitting.Solve(cands, d, sweep.X[0], xLo, xHi);
            if (f is null || !f.Axis.IsMonotone(xLo, xHi, 401)) continue;
            var bic = RepeatAxisFitting.Bic(f.ChiSquare, cands.Count, d, period);
            if (bic < bestBic - 1e-9)
            {
                bestBic = bic;
                bestFit = f;
            }
        }

        if (bestFit is null) throw SelfCalibrator.NoRepeats(sweep, instrument, period, -1);
        var res = cands.Select(c => c.Delta - (bestFit.Axis.Evaluate(c.RepeatX) - bestFit.Axis.Evaluate(c.FirstX))).ToList();
        var rms = Math.Sqrt(res.Sum(r => r * r) / res.Count);
        return (bestFit.Axis, Math.Max(rms, 0.003 * period), medLag);
    }
}
