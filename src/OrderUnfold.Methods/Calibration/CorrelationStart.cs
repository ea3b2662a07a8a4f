namespace OrderUnfold.Calibration;

/// <summary>A starting axis for the self-calibration from the sweep's own local autocorrelation.</summary>
internal static class CorrelationStart
{
    /// <summary>The sweep above its baseline (z ≥ 0), its cumulative energy, and the window and lag range searched.</summary>
    private sealed record Scan(double[] Z, double[] Cumulative, int Window, int LagMin, int LagMax, int Stride)
    {
        public int Count => Z.Length;

        /// <summary>Energy Σz² of the window starting at <paramref name="start"/>.</summary>
        public double Energy(int start) => Cumulative[start + Window] - Cumulative[start];
    }

    /// <summary>Where one window's content repeats: the scan range between it and its repeat, and the weight (similarity²).</summary>
    private readonly record struct WindowRepeat(double XLo, double XHi, double Weight, double Lag);

    /// <summary>
    /// Local autocorrelation: windows of a twelfth of the sweep (at least 0.4 of the period the stated finesse
    /// suggests) are compared with the sweep at every lag in a range set by the peak widths and the stated finesse,
    /// by the similarity 2⟨u,v⟩/(|u|²+|v|²), which is 1 only for an exact repeat; each window's best lag (the shortest
    /// of its near-equal multiples) says where its content repeats. Those repeat positions are fitted like pairs.
    /// </summary>
    internal static (AxisPolynomial Axis, double RmsHz, double PeriodSamples) StartFromCorrelation(Sweep sweep, Instrument instrument, double period,
        double delta, double medianWidth, double? priorSamples = null)
    {
        var scan = Prepare(sweep, medianWidth, priorSamples);
        if (scan.LagMax <= scan.LagMin + 2) throw SelfCalibrator.NoRepeats(sweep, instrument, period, -1);
        var peakZ = scan.Z.Max();
        var step = Math.Max(1, scan.Window / 2);
        var repeats = new List<WindowRepeat>();
        for (var a = 0; a + scan.Window + scan.LagMin < scan.Count; a += step)
            if (FindRepeat(scan, sweep, a, peakZ) is { } repeat) repeats.Add(repeat);
        if (repeats.Count == 0) throw SelfCalibrator.NoRepeats(sweep, instrument, period, -1);

        // robust: the lag that the most windows agree on (within 8 %), weighted by how well each window repeats
        // (similarity⁴: a window whose repeat lies beyond the end of the sweep finds only a look-alike, at lower
        // similarity); windows whose lag disagrees with it are dropped
        var medLag = repeats
            .Select(r => (r.Lag, Support: repeats.Where(o => Math.Abs(o.Lag / r.Lag - 1) < 0.08).Sum(o => o.Weight * o.Weight)))
            .MaxBy(t => t.Support).Lag;
        medLag = Medians.UpperOfFinite(repeats.Where(r => Math.Abs(r.Lag / medLag - 1) < 0.08).Select(r => r.Lag));
        var keep = repeats.Where(r => Math.Abs(r.Lag / medLag - 1) < 0.08).ToList();
        if (keep.Count == 0) throw SelfCalibrator.NoRepeats(sweep, instrument, period, -1);
        var constraints = keep.Select((r, k) => new RepeatConstraint(-1 - k, -1 - k, r.XLo, r.XHi, 1, 1, delta, 0.01 * period / Math.Sqrt(r.Weight), "window")).ToList();
        var bestFit = LowestBicAxis(sweep, constraints, period) ?? throw SelfCalibrator.NoRepeats(sweep, instrument, period, -1);
        var res = constraints.Select(c => c.Delta - (bestFit.Axis.Evaluate(c.RepeatX) - bestFit.Axis.Evaluate(c.FirstX))).ToList();
        var rms = Math.Sqrt(res.Sum(r => r * r) / res.Count);
        return (bestFit.Axis, Math.Max(rms, 0.003 * period), medLag);
    }

    /// <summary>
    /// No prior on the period: neither the stated finesse nor the FSR in Hz says how many samples one period spans. Every
    /// lag from a few peak widths to the end of the sweep is tried; the sums are strided by a quarter of a peak width (and
    /// the best lag refined at full resolution), which bounds the cost. A hint (from the stated finesse) narrows the search
    /// to 0.3–3.5 times it; only a further start, never a limit.
    /// </summary>
    private static Scan Prepare(Sweep sweep, double medianWidth, double? priorSamples)
    {
        var n = sweep.Count;
        var baseline = PeakFinder.Percentile(sweep.Y, 0.05);
        var z = new double[n];
        for (var i = 0; i < n; i++) z[i] = double.IsFinite(sweep.Y[i]) ? Math.Max(0, sweep.Y[i] - baseline) : 0;
        var cum = new double[n + 1];
        for (var i = 0; i < n; i++) cum[i + 1] = cum[i] + z[i] * z[i];
        var stride = Math.Max(1, (int)Math.Floor(medianWidth / 4));
        var window = Math.Max(Math.Max(16, (int)(4 * medianWidth)), n / 12);
        var lagMin = Math.Max(4, (int)(3 * medianWidth));
        var lagMax = n - window - 1;
        if (priorSamples is double prior)
        {
            window = Math.Clamp(Math.Max(n / 12, (int)(0.4 * prior)), Math.Max(16, (int)(4 * medianWidth)), Math.Max(16, (int)(0.6 * prior)));
            lagMin = Math.Max(lagMin, (int)(0.3 * prior));
            lagMax = (int)Math.Min(n - window - 1, 3.5 * prior);
        }

        return new Scan(z, cum, window, lagMin, lagMax, stride);
    }

    /// <summary>Where the content of the window starting at <paramref name="a"/> repeats; null for a weak window or one
    /// that repeats nowhere clearly.</summary>
    private static WindowRepeat? FindRepeat(Scan scan, Sweep sweep, int a, double peakZ)
    {
        var (z, window, lagMin) = (scan.Z, scan.Window, scan.LagMin);
        var energy = scan.Energy(a);
        var top = 0.0;
        for (var i = a; i < a + window; i++) top = Math.Max(top, z[i]);
        if (top < 0.15 * peakZ || !(energy > 0)) return null;
        var hi = Math.Min(scan.LagMax, scan.Count - window - a);
        if (hi <= lagMin + 2) return null;
        var c = new double[hi + 2];
        var best = BestLag(scan, a, hi, c);
        if (c[best] < 0.35) return null;
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
        var lagTrue = best + frac;
        var x1 = PeakFinder.Interpolate(sweep.X, centre);
        var x2 = PeakFinder.Interpolate(sweep.X, Math.Min(scan.Count - 1, centre + lagTrue));
        return new WindowRepeat(Math.Min(x1, x2), Math.Max(x1, x2), c[best] * c[best], lagTrue);
    }

    /// <summary>2⟨u,v⟩/(|u|²+|v|²) of the window at <paramref name="a"/> and its copy <paramref name="lag"/> later, summed
    /// every <paramref name="inner"/> samples: 1 only for equal content, lower for look-alikes of another height.</summary>
    private static double Similarity(Scan scan, int a, int lag, int inner)
    {
        var s = 0.0;
        for (var i = a; i < a + scan.Window; i += inner) s += scan.Z[i] * scan.Z[i + lag];
        var e2 = scan.Cumulative[a + lag + scan.Window] - scan.Cumulative[a + lag];
        return e2 > 0 ? 2 * s * inner / (scan.Energy(a) + e2) : 0;
    }

    /// <summary>The window's best lag up to <paramref name="hi"/> (similarities into <paramref name="c"/>): the strided
    /// maximum, moved to the shortest lag that correlates almost as well (a whole multiple of the period correlates too),
    /// refined at full resolution. Returns <see cref="Scan.LagMin"/> with c below 0.3 when nothing repeats.</summary>
    private static int BestLag(Scan scan, int a, int hi, double[] c)
    {
        var (lagMin, stride) = (scan.LagMin, scan.Stride);
        for (var lag = lagMin; lag <= hi; lag += stride) c[lag] = Similarity(scan, a, lag, stride);
        var best = lagMin;
        for (var lag = lagMin; lag <= hi; lag += stride) if (c[lag] > c[best]) best = lag;
        if (c[best] < 0.3) return best;
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

        if (stride <= 1) return best;
        var from = Math.Max(lagMin, best - stride - 1);
        var to = Math.Min(hi, best + stride + 1);
        for (var lag = from; lag <= to; lag++) c[lag] = Similarity(scan, a, lag, 1);
        best = from;
        for (var lag = from; lag <= to; lag++) if (c[lag] > c[best]) best = lag;
        return best;
    }

    /// <summary>The monotone axis of degree 1–3 (at most constraints − 2) with the lowest BIC; null when none.</summary>
    private static RepeatAxisFit? LowestBicAxis(Sweep sweep, List<RepeatConstraint> constraints, double period)
    {
        var maxDegree = Math.Min(3, Math.Max(1, constraints.Count - 2));
        RepeatAxisFit? bestFit = null;
        var bestBic = double.PositiveInfinity;
        var xLo = Math.Min(sweep.X[0], sweep.X[^1]);
        var xHi = Math.Max(sweep.X[0], sweep.X[^1]);
        for (var d = 1; d <= maxDegree; d++)
        {
            var f = RepeatAxisFitting.Solve(constraints, d, sweep.X[0], xLo, xHi);
            if (f is null || !f.Axis.IsMonotone(xLo, xHi, 401)) continue;
            var bic = RepeatAxisFitting.Bic(f.ChiSquare, constraints.Count, d, period);
            if (bic < bestBic - 1e-9)
            {
                bestBic = bic;
                bestFit = f;
            }
        }

        return bestFit;
    }
}
