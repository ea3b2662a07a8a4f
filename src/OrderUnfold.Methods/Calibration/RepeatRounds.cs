namespace OrderUnfold.Calibration;

/// <summary>What the pairing rounds from one starting axis found (see <see cref="SelfCalibrationResult"/> for the fields'
/// meaning); the calibration sweep's intervals are shared between runs, so each run keeps their flags as it left them.</summary>
internal sealed record PairingRun(List<RepeatConstraint> Pairs, RepeatAxisFit? Fit, List<DegreeScore> Scores, int Iterations, double Coverage, double HeightMismatch,
    double PeriodSamples, List<(RepeatConstraint Pair, (bool Used, double Residual) State)> CompanionStateList)
{
    public IEnumerable<(RepeatConstraint, (bool Used, double Residual))> CompanionState => CompanionStateList.Select(t => (t.Pair, t.State));
}

/// <summary>Rounds of pairing and fitting from one starting axis, and what the pairs leave unrepeated.</summary>
internal static class RepeatRounds
{
    /// <summary>Rounds of pairing and fitting from one starting axis, with a window that narrows as the axis improves.</summary>
    internal static PairingRun Rounds(List<DetectedPeak> peaks, List<RepeatConstraint> companionPairs, AxisPolynomial axis, double rmsHz, double delta, Sweep sweep,
        SelfCalibrationOptions options, double xLo, double xHi, double noise)
    {
        List<RepeatConstraint> pairs = [];
        List<DegreeScore> scores = [];
        RepeatAxisFit? fit = null;
        var iterations = 0;
        HashSet<(int, int)>? previous = null;
        for (var round = 0; round < options.MaxIterations; round++)
        {
            iterations = round + 1;
            var widthFactor = round == 0 ? 1.2 : round == 1 ? 0.7 : options.PairWindowWidths;
            // after the first round, repeats must keep the height ratio the earlier pairs show; with too few pairs
            // to say, they must agree in height and width within 25 %
            var model = round == 0 ? null : HeightModel.From(pairs);
            var shape = round > 0 && model is null ? Math.Min(1.25, options.ShapeRatioTolerance) : options.ShapeRatioTolerance;
            var matched = RepeatMatching.Match(peaks, axis, delta, widthFactor, rmsHz, shape, xLo, xHi, model);
            if (matched.Count < 1)
            {
                if (round > 0) (fit, pairs) = (null, []); // what the first round paired does not hold up
                break;
            }

            pairs = matched;
            var all = pairs.Concat(companionPairs).ToList();
            (fit, scores) = RepeatAxisFitting.FitWithRejection(all, sweep, options, xLo, xHi);
            axis = fit.Axis;
            var used = all.Where(c => c.Used).ToList();
            rmsHz = Math.Max(Math.Sqrt(used.Sum(c => c.Residual * c.Residual) / Math.Max(1, used.Count)), 1e-6 * Math.Abs(delta));
            var key = pairs.Where(c => c.Used).Select(c => (c.FirstIndex, c.RepeatIndex)).ToHashSet();
            if (round >= 2 && previous is not null && key.SetEquals(previous)) break;
            previous = key;
        }

        double coverage = 0, mismatch = double.PositiveInfinity;
        if (fit is not null)
        {
            coverage = Coverage(peaks, pairs, fit.Axis, delta, xLo, xHi);
            mismatch = HeightMismatch(pairs, noise);
        }

        var periodSamples = fit is null ? double.NaN : SamplesPerPeriod(sweep, fit.Axis, Math.Abs(delta));
        var state = companionPairs.Select(c => (c, (c.Used, c.Residual))).ToList();
        return new PairingRun(pairs, fit, scores, iterations, coverage, mismatch, periodSamples, state);
    }

    /// <summary>The share of the peaks that could have a repeat inside the sweep and have one, weighted by height (a weak
    /// peak's repeat may sink into the noise).</summary>
    private static double Coverage(List<DetectedPeak> peaks, List<RepeatConstraint> pairs, AxisPolynomial axis, double delta, double xLo, double xHi)
    {
        var fA = axis.Evaluate(xLo);
        var fB = axis.Evaluate(xHi);
        var (fMin, fMax) = (Math.Min(fA, fB), Math.Max(fA, fB));
        var period = Math.Abs(delta);
        var paired = new HashSet<int>();
        foreach (var c in pairs.Where(c => c.Used))
        {
            paired.Add(c.FirstIndex);
            paired.Add(c.RepeatIndex);
        }

        double eligible = 0, hit = 0;
        for (var i = 0; i < peaks.Count; i++)
        {
            var f = axis.Evaluate(peaks[i].X);
            if (!(f + period <= fMax - 0.01 * period || f - period >= fMin + 0.01 * period)) continue;
            eligible += peaks[i].Height;
            if (paired.Contains(i)) hit += peaks[i].Height;
        }

        return eligible > 0 ? hit / eligible : 0;
    }

    /// <summary>Height mismatch of the used pairs in units of its noise, about a linear trend along the sweep (laser power
    /// drift): about 0.7 for true repeats, many times that for look-alikes of other heights; +∞ without pairs.</summary>
    private static double HeightMismatch(List<RepeatConstraint> pairs, double noise)
    {
        var used = pairs.Where(c => c.Used && c.FirstIndex >= 0).ToList();
        if (used.Count == 0) return double.PositiveInfinity;
        var model = used.Count >= 4 ? HeightModel.From(used) : null;
        var z = used.Select(c =>
        {
            var trend = model is null ? 0 : model.Intercept + model.Slope * c.FirstX;
            var sigma = Math.Sqrt(Square(noise / c.FirstHeight) + Square(noise / c.RepeatHeight)) + 1e-4;
            return Math.Abs(Math.Log(c.RepeatHeight / c.FirstHeight) - trend) / sigma;
        });
        return Medians.Upper(z);
    }

    /// <summary>
    /// Stretches of about one period where most clear peaks have no repeat one period later (or earlier) although
    /// the repeat would lie inside the sweep: the source changed there (a mode hop) or the peaks are not source lines.
    /// </summary>
    internal static IEnumerable<string> UnrepeatedStretches(Sweep sweep, List<DetectedPeak> peaks, List<RepeatConstraint> pairs, AxisPolynomial axis, double delta, double xLo, double xHi)
    {
        if (peaks.Count < 6) yield break;
        var forward = new bool[peaks.Count];
        var backward = new bool[peaks.Count];
        foreach (var c in pairs.Where(c => c.Used && c.FirstIndex >= 0))
        {
            forward[c.FirstIndex] = true;
            backward[c.RepeatIndex] = true;
        }

        var fA = axis.Evaluate(xLo);
        var fB = axis.Evaluate(xHi);
        var (fMin, fMax) = (Math.Min(fA, fB), Math.Max(fA, fB));
        var period = Math.Abs(delta);
        var tallest = peaks.Max(p => p.Height);
        var misses = new List<(double X, double F, bool Missing)>();
        for (var i = 0; i < peaks.Count; i++)
        {
            if (peaks[i].Height < 0.1 * tallest) continue; // a weak peak's repeat may hide in the noise
            var f = axis.Evaluate(peaks[i].X);
            // the partner in the direction of increasing x: f + Δ (Δ carries the sweep's sign); a peak counts as repeated when
            // a used pair says so or when any peak lies within a peak width of where its repeat falls (a pair the fit did not
            // use, e.g. between partly resolved doublets whose shapes differ, is still a repeat: the source did not change)
            var width = Math.Abs(axis.Derivative(peaks[i].X)) * peaks[i].WidthX;
            var repeated = forward[i] || peaks.Any(q => Math.Abs(axis.Evaluate(q.X) - (f + delta)) <= width);
            if (f + delta > fMin + 0.02 * period && f + delta < fMax - 0.02 * period) misses.Add((peaks[i].X, f, !repeated));
        }

        if (misses.Count < 4) yield break;
        var blocks = misses.GroupBy(m => (int)Math.Floor((m.F - fMin) / period)).OrderBy(g => g.Min(m => m.X));
        foreach (var g in blocks)
        {
            var n = g.Count();
            var bad = g.Count(m => m.Missing);
            if (n >= 3 && bad > 0.5 * n)
                yield return $"{sweep.Name}: between x = {g.Min(m => m.X):G5} and {g.Max(m => m.X):G5} only {n - bad} of {n} clear peaks repeat one FSR later: " +
                             "the source changed during the sweep (a mode hop?) or these peaks are not source lines; the axis rests on the other repeats";
        }
    }

    internal static double SamplesPerPeriod(Sweep sweep, AxisPolynomial axis, double period)
    {
        var mid = sweep.Count / 2;
        var dxdi = Math.Abs(sweep.X[Math.Min(sweep.Count - 1, mid + 1)] - sweep.X[mid]);
        var slope = Math.Abs(axis.Derivative(sweep.X[mid]));
        return slope > 0 && dxdi > 0 ? period / (slope * dxdi) : double.NaN;
    }

    private static double Square(double v) => v * v;
}
