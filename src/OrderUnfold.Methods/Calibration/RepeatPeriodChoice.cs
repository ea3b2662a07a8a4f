using OrderUnfold.Units;

namespace OrderUnfold.Calibration;

/// <summary>Which repeat period a self-calibration takes: the run to keep among the starts, and the period decision on the
/// whole peak pattern.</summary>
internal static class RepeatPeriodChoice
{
    /// <summary>
    /// Picks the period among the runs: the true period pairs every feature with a repeat of the same height, so
    /// its height ratios are closest to one and it pairs nearly every peak that can have a repeat; of the runs that
    /// do about equally well (whole multiples of the period), the shortest period is the period.
    /// </summary>
    internal static PairingRun Choose(List<PairingRun> runs, List<DetectedPeak> peaks, double delta, double xLo, double xHi)
    {
        var valid = runs.Where(r => r.Fit is not null && r.Pairs.Count(c => c.Used) >= 1).ToList();
        if (valid.Count <= 1) return valid.Count == 1 ? valid[0] : runs[0];
        // the same feature one period later has the same height: runs at a wrong period pair look-alikes whose
        // heights differ; of the runs with consistent heights, those with about the best coverage are whole
        // multiples of the period, and the shortest is the period
        var bestMismatch = valid.Min(r => r.HeightMismatch);
        var consistent = valid.Where(r => r.HeightMismatch <= Math.Max(2 * bestMismatch, bestMismatch + 1.5)).ToList();
        var bestCoverage = consistent.Max(r => r.Coverage);
        var viable = consistent.Where(r => r.Coverage >= 0.85 * bestCoverage).ToList();
        return viable.MinBy(r => r.PeriodSamples)!;
    }

    /// <summary>
    /// Scores the chosen period, its half and its double (and the other starts) against the whole peak pattern
    /// (<see cref="PeriodDecider"/>), splits the groups at the period into source lines and cavity families, and
    /// says which factor to adopt instead of the chosen period (null: keep it).
    /// </summary>
    internal static (PeriodDecision Decision, double? AdoptFactor) DecidePeriod(PairingRun chosen, List<PairingRun> runs, List<DetectedPeak> peaks, Sweep sweep, Instrument instrument,
        double period, double xLo, double xHi)
    {
        var axis = chosen.Fit!.Axis;
        var tallest = peaks.Max(p => p.Height);
        var clear = peaks.Where(p => p.Height >= 0.1 * tallest).Select(p => new PeriodDecider.PatternPeak(p.X, p.Height, p.WidthX)).ToList();
        var f0 = axis.Evaluate(xLo);
        double U(double x) => (axis.Evaluate(x) - f0) / period;
        var uLo = Math.Min(U(xLo), U(xHi));
        var uHi = Math.Max(U(xLo), U(xHi));
        var mid = 0.5 * (axis.XMin + axis.XMax);
        var slope = Math.Abs(axis.Derivative(mid));
        var periodScan = slope > 0 ? period / slope : double.NaN;
        // positions agree within about a peak width, or three times the axis residual when that is larger
        var fwhm = Medians.UpperOfFinite(clear.Select(p => p.WidthX * Math.Abs(axis.Derivative(p.X)) / period));
        var rms = chosen.Pairs.Where(c => c.Used).Select(c => c.Residual * c.Residual).DefaultIfEmpty(0).Average();
        var tol = Math.Clamp(Math.Max(double.IsFinite(fwhm) ? fwhm : 0.01, 3 * Math.Sqrt(rms) / period), 0.005, 0.03);

        var list = new List<(PeriodCandidateScore Score, double K)>();
        void Add(string label, double k)
        {
            if (list.Any(c => Math.Abs(c.K / k - 1) < 0.03)) return;
            var sc = PeriodDecider.Score(label, periodScan * k, clear, x => U(x) / k, uLo / k, uHi / k, tol / k);
            list.Add((sc, k));
        }

        Add("chosen", 1);
        Add("half", 0.5);
        Add("double", 2);
        foreach (var r in runs.Where(r => r.Fit is not null && double.IsFinite(r.PeriodSamples)))
        {
            var k = r.PeriodSamples / chosen.PeriodSamples;
            if (k > 0.2 && k < 5) Add($"start ×{k:F2}", Math.Round(k * 4) / 4 is var q && q > 0 && Math.Abs(q / k - 1) < 0.03 ? q : k);
        }

        var (adopt, basis) = Adoption(list);

        // groups at the period → source lines and transverse families of the cavity
        var groups = PeriodDecider.Group(clear, U, tol);
        var minMembers = uHi - uLo >= 2 ? 2 : 1;
        // every peak the pairing uses (down to a few % of the tallest) may hold a weak family at a rung of the ladder
        var weakGroups = PeriodDecider.Group(peaks.Select(p => new PeriodDecider.PatternPeak(p.X, p.Height, p.WidthX)).ToList(), U, tol);
        var split = adopt is null ? PeriodDecider.Split(groups, instrument, tol, minMembers, weakGroups) : new PeriodDecider.FamilySplit([], "", null);
        var (families, fundamental) = (split.Families, split.Fundamental);

        // a stated confocal FSR (c/4L) is the peak period only when the odd family is degenerate with TEM00 of the next
        // order; a resolved odd family near half the period means TEM00 repeats every c/2L, twice the stated FSR
        var periodHz = period;
        var odd = families.FirstOrDefault(f => f.N == 1 && Math.Abs(f.ApparentOffsetFsr - 0.5) < 0.06);
        if (adopt is null && instrument.Geometry == CavityGeometry.Confocal && odd is not null)
        {
            periodHz = 2 * period;
            basis += $"; the odd transverse family sits at {odd.ApparentOffsetFsr:F4} of the period with {100 * odd.RelativeHeight:F0} % of TEM00's height, " +
                     $"so the cavity is not exactly confocal: TEM00 repeats every c/2L and the FSR is {Quantity.FormatFrequency(periodHz)}, twice the stated {Quantity.FormatFrequency(period)}";
        }

        var scores = list.Select(c => c.Score with { Chosen = c.K == 1 }).ToList();
        return (new PeriodDecision(periodScan, periodHz, period, scores, basis, families, fundamental) { FundamentalPhase = split.FundamentalPhase, Tolerance = tol }, adopt);
    }

    /// <summary>Which factor of the chosen period to adopt (null: keep it) and why, in words: the shortest consistent
    /// period that predicts repeats; else the chosen one when consistent; else its double when that explains every peak.</summary>
    private static (double? Adopt, string Basis) Adoption(List<(PeriodCandidateScore Score, double K)> list)
    {
        var one = list.First(c => c.K == 1);
        var dbl = list.First(c => c.K == 2);
        var shorter = list.Where(c => c.K < 0.97 && c.Score.Consistent && c.Score.Predictions > 0).OrderBy(c => c.K).FirstOrDefault();
        if (shorter.Score is not null)
            return (shorter.K, $"a shorter period ({shorter.Score.Label}) explains every peak as well: the shortest consistent period is the period");
        if (one.Score.Consistent) return (null, "the shortest period at which every peak group repeats with the same height");
        if (dbl.Score.Consistent && dbl.Score.Predictions > 0) return (2, "only the double of the first repeat period explains every peak");
        return (null, "no candidate explains the peak pattern");
    }
}
