using MathNet.Numerics.LinearAlgebra;
using OrderUnfold.Instruments;
using OrderUnfold.Units;

namespace OrderUnfold.Calibration;

/// <summary>Options of <see cref="SelfCalibrator"/>.</summary>
public sealed record SelfCalibrationOptions
{
    /// <summary>Polynomial degree of the axis; null chooses it by leave-one-out cross-validation over the pairs.</summary>
    public int? Degree { get; init; }

    /// <summary>Largest degree tried when the degree is chosen from the data.</summary>
    public int MaxDegree { get; init; } = AxisCalibrator.MaxAutoDegree;

    /// <summary>Peaks lower than this fraction of the tallest are not used.</summary>
    public double MinHeightFraction { get; init; } = 0.04;

    /// <summary>Peaks below this height-to-noise ratio are not used.</summary>
    public double MinSnr { get; init; } = 6;

    /// <summary>Final half-width of the pairing window, in peak widths (FWHM), before the axis uncertainty is added.</summary>
    public double PairWindowWidths { get; init; } = 0.4;

    /// <summary>Largest ratio of the heights (and of the widths) of two peaks that may be the same feature one FSR apart.</summary>
    public double ShapeRatioTolerance { get; init; } = 1.7;

    /// <summary>Rounds of pairing and fitting.</summary>
    public int MaxIterations { get; init; } = 10;

    /// <summary>Pairs whose residual exceeds this many robust standard deviations are rejected.</summary>
    public double RejectSigma { get; init; } = 3;

    /// <summary>Starting axis (e.g. from a calibration sweep of the same ramp direction); null estimates it from
    /// the sweep's own local autocorrelation.</summary>
    public AxisPolynomial? InitialAxis { get; init; }

    /// <summary>A calibration-sweep axis of the same instrument and ramp direction whose points are fitted jointly.</summary>
    public AxisCalibration? Companion { get; init; }

    /// <summary>Frequency interval after which every feature repeats, Hz; null: the instrument's FSR. For a
    /// calibration laser of another wavelength this is FSR·λ_cal/λ_source (in source frequency units).</summary>
    public double? PeriodHz { get; init; }

    /// <summary>Fit the effective finesse from isolated peaks (costs a few small fits).</summary>
    public bool FitFinesse { get; init; } = true;

    /// <summary>When the peaks show transverse families on a Gouy ladder (a family N ≥ 2 besides N = 1), refit the axis to every
    /// peak of the line and its families at once (<see cref="SelfCalibrator"/>, the ladder refit); false keeps the repeat pairs alone.</summary>
    public bool UseFamilyLadder { get; init; } = true;
}

/// <summary>Two peaks taken to be one feature one period apart: f(XB) − f(XA) = DeltaHz.</summary>
/// <param name="XA">Scan coordinate of the first peak (the smaller x).</param>
/// <param name="XB">Scan coordinate of its repeat.</param>
/// <param name="HeightA">Height of the first peak.</param>
/// <param name="HeightB">Height of the repeat.</param>
/// <param name="DeltaHz">Frequency difference the pair states (±period, sign by the sweep convention).</param>
/// <param name="SigmaHz">Standard uncertainty assigned to the constraint.</param>
/// <param name="Origin">"repeat" (from the sweep itself) or "calibration" (from a calibration sweep).</param>
/// <param name="ResidualHz">DeltaHz − (f(XB) − f(XA)) for the final axis.</param>
/// <param name="Used">False when rejected as an outlier.</param>
public sealed record RepeatPair(double XA, double XB, double HeightA, double HeightB, double DeltaHz, double SigmaHz, string Origin,
    double ResidualHz, bool Used);

/// <summary>How one polynomial degree scored.</summary>
/// <param name="Degree">Degree.</param>
/// <param name="ChiSquare">Weighted residual sum of squares.</param>
/// <param name="Bic">Bayesian information criterion n·ln(χ²/n) + d·ln n (lower is better), for reference.</param>
/// <param name="LeaveOneOut">Leave-one-out prediction error Σ (rᵢ/(1 − hᵢᵢ))² of the whitened constraints (PRESS), which chooses the degree.</param>
/// <param name="Monotone">Whether the axis is monotone over the calibrated range.</param>
public sealed record DegreeScore(int Degree, double ChiSquare, double Bic, double LeaveOneOut, bool Monotone);

/// <summary>What <see cref="SelfCalibrator.Calibrate"/> found.</summary>
/// <param name="Calibration">The axis, ready for the pipeline (method, residuals, finesse, warnings).</param>
/// <param name="Pairs">Every pair considered in the last round, used or rejected.</param>
/// <param name="Peaks">The peaks found in the sweep.</param>
/// <param name="Degrees">Score of each degree tried in the last round.</param>
/// <param name="AxisSigmaHz">RMS standard uncertainty of the axis over the calibrated range (constant removed), Hz.</param>
/// <param name="Iterations">Pairing rounds used.</param>
/// <param name="InitialPeriodSamples">Samples per period at the sweep centre according to the starting axis.</param>
/// <param name="Candidates">Every starting period tried and how its pairs scored.</param>
public sealed record SelfCalibrationResult(AxisCalibration Calibration, IReadOnlyList<RepeatPair> Pairs, IReadOnlyList<Peak> Peaks,
    IReadOnlyList<DegreeScore> Degrees, double AxisSigmaHz, int Iterations, double InitialPeriodSamples, IReadOnlyList<PeriodCandidate> Candidates);

/// <summary>One starting period tried by the self-calibration.</summary>
/// <param name="PeriodSamples">Samples per period at the sweep centre on the axis this start converged to (NaN when it found no pairs).</param>
/// <param name="Pairs">Repeat pairs used.</param>
/// <param name="Coverage">Height-weighted share of the peaks that could have a repeat inside the sweep and have one.</param>
/// <param name="HeightMismatch">Median of |ln(h_b/h_a)| about its trend along the sweep, in units of its noise (about 0.7 for true repeats).</param>
/// <param name="Chosen">Whether this start gave the axis.</param>
public sealed record PeriodCandidate(double PeriodSamples, int Pairs, double Coverage, double HeightMismatch, bool Chosen);

/// <summary>
/// Calibrates a sweep axis from the sweep itself: every feature of the source repeats exactly one FSR later,
/// so pairs of peaks one FSR apart give constraints f(x_b) − f(x_a) = ±FSR that are linear in the
/// polynomial's coefficients. A starting axis comes from the local autocorrelation of the sweep (or from
/// a calibration sweep); each peak's repeat is then looked for in a tight window around the position the
/// current axis predicts, with a consistent height and width; all pairs are fitted jointly, outliers are
/// rejected by their leave-one-out residuals, and the rounds repeat with a narrowing window. The degree is
/// chosen by leave-one-out cross-validation among monotone fits; the axis residual and its uncertainty are reported.
/// </summary>
public static class SelfCalibrator
{
    /// <summary>A period that explains fewer of its predicted repeats than this is not used, even when it beats its half and
    /// double (between this and <see cref="PeriodDecider.MinExplained"/> it is kept with a warning).</summary>
    public const double MinExplainedToKeep = 0.7;



    /// <summary>Self-calibrates one sweep segment (x relative to the segment start for time scans).</summary>
    /// <exception cref="InputException">The sweep is too short, has no repeats, or the constraints cannot support the axis.</exception>
    public static SelfCalibrationResult Calibrate(Sweep sweep, Instrument instrument, SelfCalibrationOptions? options = null)
    {
        options ??= new SelfCalibrationOptions();
        var period = options.PeriodHz ?? instrument.FsrHz;
        if (!(period > 0)) throw new ArgumentException("the repeat period must be positive", nameof(options));
        if (sweep.Count < 64)
            throw new InputException($"{sweep.Name}: {sweep.Count} samples are too few to self-calibrate (needs at least 64)", sweep.Source);
        var sign = sweep.Direction == RampDirection.Down && sweep.Scan == ScanCoordinate.Time ? -1.0 : 1.0;
        var delta = sign * period;
        var warnings = new List<string>();
        var noise = PeakFinder.NoiseSigma(sweep.Y);

        var found = ResolvedPeaks.Find(sweep.X, sweep.Y, options.MinHeightFraction, options.MinSnr);
        var peaks = found.Select(p => new P(p, WidthX(sweep, p), PositionSigmaX(sweep, p, noise))).OrderBy(p => p.X).ToList();
        var xLo = Math.Min(sweep.X[0], sweep.X[^1]);
        var xHi = Math.Max(sweep.X[0], sweep.X[^1]);
        if (peaks.Count < 2)
            throw new InputException($"{sweep.Name}: found {peaks.Count} peak(s); self-calibration needs peaks that repeat one FSR apart. " +
                                     "Check the signal column, or add a [[calibration]] sweep for this instrument", sweep.Source);

        var medianWidthSamples = Median(found.Select(p => p.WidthSamples));

        // starting axis, and the candidate periods it allows
        var companionPairs = CompanionPairs(options.Companion, instrument);
        var starts = new List<(AxisPolynomial Axis, double RmsHz)>();
        var initialPeriodSamples = double.NaN;
        if (options.InitialAxis is not null || options.Companion is not null)
        {
            // a given axis is one start; it may be good only near the calibration peaks, so the sweep's own
            // autocorrelation gives further starts when it can
            var axis0 = options.InitialAxis ?? options.Companion!.Axis;
            var rms0 = Math.Max(options.Companion?.ResidualRmsHz is double r && double.IsFinite(r) ? r : 0, 0.02 * period);
            starts.Add((axis0, rms0));
            initialPeriodSamples = SamplesPerPeriod(sweep, axis0, period);
        }

        // starts from the sweep's own autocorrelation over every lag, and (a hint only) over the lags the stated
        // finesse and the peak widths suggest; the pairs decide between them
        var hint = instrument.Finesse * medianWidthSamples * period / instrument.FsrHz;
        InputException? correlationError = null;
        foreach (var prior in new double?[] { null, hint > 3 * medianWidthSamples && hint < sweep.Count ? hint : null }.Distinct())
        try
        {
            var (axis0, rms0, lag) = StartFromCorrelation(sweep, instrument, period, delta, medianWidthSamples, prior);
            if (double.IsNaN(initialPeriodSamples)) initialPeriodSamples = lag;
            // A source whose folded pattern nearly repeats within one FSR correlates almost as well at a fraction of
            // the period, and every pattern repeats at multiples of it: try the multiples that fit in the sweep and
            // let the pairs decide (see Choose).
            foreach (var k in new[] { 1.0, 2, 3, 4, 0.5 })
            {
                var lagK = k * lag;
                if (lagK > sweep.Count - 2 * medianWidthSamples || lagK < 3 * medianWidthSamples) continue;
                starts.Add((axis0.Scaled(1 / k), rms0 / k));
            }
        }
        catch (InputException e)
        {
            // no repeat period in the sweep's own autocorrelation: the other starts remain
            correlationError ??= e;
        }

        if (starts.Count == 0) throw correlationError ?? NoRepeats(sweep, instrument, period, peaks.Count);

        var runs = new List<Run>();
        InputException? firstError = null;
        foreach (var (axis0, rms0) in starts)
        {
            try
            {
                runs.Add(Rounds(peaks, companionPairs, axis0, rms0, delta, sweep, options, xLo, xHi, noise));
            }
            catch (InputException e)
            {
                firstError ??= e;
            }
        }

        if (runs.All(r => r.Fit is null)) throw firstError ?? NoRepeats(sweep, instrument, period, peaks.Count);
        var chosen = Choose(runs, peaks, delta, xLo, xHi);
        if (chosen.Fit is null || chosen.Pairs.Count == 0) throw NoRepeats(sweep, instrument, period, peaks.Count);

        // the period from the whole peak pattern: the half and the double of the chosen period are tested explicitly;
        // a consistent shorter period replaces the chosen one, and a pattern no candidate explains is refused
        PeriodDecision? decision = null;
        for (var attempt = 0; attempt < 2; attempt++)
        {
            var (d, adoptFactor) = DecidePeriod(chosen, runs, peaks, sweep, instrument, period, xLo, xHi);
            decision = d;
            if (adoptFactor is not double k) break;
            Run? adopted = null;
            try
            {
                adopted = Rounds(peaks, companionPairs, chosen.Fit!.Axis.Scaled(1 / k), Math.Max(chosen.Fit.AxisSigmaHz, 0.01 * period), delta, sweep, options, xLo, xHi, noise);
            }
            catch (InputException)
            {
                adopted = null;
            }

            if (adopted?.Fit is null || adopted.Pairs.Count(c => c.Used) == 0)
                throw Undecided(sweep, d, $"a period {k:G3} times the first explains the peaks but its repeats could not be fitted");
            runs.Add(adopted);
            chosen = adopted;
        }

        // transverse families on the rungs of a Gouy ladder (N·a) tie the peaks of each order together: the axis is refitted
        // to every labelled peak at once, with the ladder's one offset free (LadderFit); kept when it explains the peaks at
        // least as well as the pairs do and the period decision stands on it
        Ladder? ladderUsed = null;
        if (decision is not null && options.UseFamilyLadder && options.Degree is null && companionPairs.Count == 0 &&
            LadderFit(chosen, decision, peaks, sweep, options, period, xLo, xHi) is { } ladder)
        {
            var before = chosen.Pairs.Select(c => c.Residual).ToList();
            foreach (var c in chosen.Pairs) c.Residual = c.Delta - (ladder.Fit.Axis.Evaluate(c.XB) - ladder.Fit.Axis.Evaluate(c.XA));
            var trial = chosen with { Fit = ladder.Fit, Scores = ladder.Scores };
            var (d2, adopt2) = DecidePeriod(trial, runs, peaks, sweep, instrument, period, xLo, xHi);
            // the ladder is physics of ideal spherical mirrors; an astigmatic cavity splits its families off the rungs. The extra
            // constraints must agree with the peaks as well as the pairs alone do (reduced χ² at most twice theirs, or 2)
            var pairFit = chosen.Fit!;
            var pairDof = Math.Max(1, chosen.Pairs.Count(c => c.Used) - pairFit.Axis.Degree);
            var agrees = ladder.ReducedChiSquare <= 2 * Math.Max(1, pairFit.ChiSquare / pairDof);
            if (!agrees)
                warnings.Add($"{sweep.Name}: the transverse families do not lie on one Gouy ladder within the peak positions' uncertainty (reduced χ² {ladder.ReducedChiSquare:G3} against {pairFit.ChiSquare / pairDof:G3} of the repeat pairs alone); the axis rests on the repeat pairs");
            if (agrees && adopt2 is null && Math.Abs(d2.PeriodHz / decision.PeriodHz - 1) < 1e-9 && d2.Families.Count >= decision.Families.Count &&
                d2.Candidates.First(c => c.Chosen).Consistent == decision.Candidates.First(c => c.Chosen).Consistent)
            {
                runs[runs.IndexOf(chosen)] = trial;
                chosen = trial;
                decision = d2;
                ladderUsed = ladder;
            }
            else
            {
                for (var i = 0; i < before.Count; i++) chosen.Pairs[i].Residual = before[i];
            }
        }

        if (decision is not null && decision.Candidates.FirstOrDefault(c => c.Chosen) is { Consistent: false } mine)
        {
            // the chosen period does not explain every repeat (a mode hop, a dense pattern of similar lines): keep it only
            // when it explains clearly more than its half and its double; otherwise the evidence does not decide
            var rival = decision.Candidates.Where(c => c.Label is "half" or "double").MaxBy(c => c.Explained)!;
            if (rival.Explained >= mine.Explained - 0.1)
                throw Undecided(sweep, decision, $"the {rival.Label} period explains the peak pattern about as well as the chosen one");
            if (mine.Explained < MinExplainedToKeep)
                throw Undecided(sweep, decision, $"the best period explains only {mine.Explained:P0} of the repeats its peak groups predict");
            warnings.Add($"{sweep.Name}: the period explains only {mine.Explained:P0} of the repeats its peak groups predict (its {rival.Label} {rival.Explained:P0}): " +
                         "the source may have changed during the sweep, or some peaks are not source lines; a [[calibration]] sweep would settle the scale");
        }
        var pairs = chosen.Pairs;
        var fit = chosen.Fit;
        var scores = chosen.Scores;
        var iterations = chosen.Iterations;
        // the chosen run's flags are the ones that count (the companion intervals are shared between runs)
        foreach (var (c, used) in chosen.CompanionState) { c.Used = used.Used; c.Residual = used.Residual; }
        var allPairs = pairs.Concat(companionPairs).ToList();
        var usedPairs = allPairs.Where(c => c.Used).ToList();
        var usedRepeats = pairs.Count(c => c.Used);
        var rejected = allPairs.Count - usedPairs.Count;
        var residualRms = Math.Sqrt(usedPairs.Sum(c => c.Residual * c.Residual) / Math.Max(1, usedPairs.Count));
        var final = fit.Axis;

        // calibration points: each pair's repeat with the frequency its partner assigns it
        var pointX = usedPairs.Select(c => c.XB).ToArray();
        var pointHz = usedPairs.Select(c => final.Evaluate(c.XA) + c.Delta).ToArray();
        var residualHz = usedPairs.Select(c => c.Residual).ToArray();

        // warnings
        var lw = instrument.LinewidthHz * period / instrument.FsrHz;
        if (residualRms > 0.1 * lw)
            warnings.Add($"{sweep.Name}: the self-calibrated axis fits its repeats with a residual RMS of {Quantity.FormatFrequency(residualRms, 3)} ({residualRms / lw:F2} linewidths); " +
                         "line positions may be off by that much (a noisy or drifting sweep, or peaks that do not repeat exactly)");
        if (fit.AxisSigmaHz > 0.1 * lw)
            warnings.Add($"{sweep.Name}: the self-calibrated axis is uncertain by {Quantity.FormatFrequency(fit.AxisSigmaHz, 3)} RMS ({fit.AxisSigmaHz / lw:F2} linewidths) with {usedPairs.Count} pairs; sweep over more FSRs or add a calibration sweep");
        if (allPairs.Count > 0 && rejected > 0.2 * allPairs.Count)
            warnings.Add($"{sweep.Name}: {rejected} of {allPairs.Count} repeat pairs were rejected as outliers; the source may not be stable over the sweep");
        if ((ladderUsed?.Points ?? usedPairs.Count) < 2 * (final.Degree + 1))
            warnings.Add($"{sweep.Name}: only {usedPairs.Count} repeat pairs support a degree-{final.Degree} axis; the non-linearity of the piezo is poorly pinned");
        var atMax = scores.FirstOrDefault(d => d.Degree == final.Degree);
        var below = scores.FirstOrDefault(d => d.Degree == final.Degree - 1);
        if (options.Degree is null && final.Degree == options.MaxDegree && atMax is not null && below is not null && below.LeaveOneOut > 2 * atMax.LeaveOneOut)
            warnings.Add($"{sweep.Name}: the axis needed degree {final.Degree}, the largest tried; the ramp may be more non-linear than a polynomial describes");
        warnings.AddRange(UnrepeatedStretches(sweep, peaks, pairs, final, delta, xLo, xHi));

        // effective finesse from isolated peaks on the new axis
        FinesseEstimate? finesse = null;
        if (options.FitFinesse)
        {
            finesse = FinesseFit.FromSweep(sweep, final, period, instrument.Finesse, found);
            if (finesse is not null)
            {
                warnings.AddRange(finesse.Warnings.Select(w => $"{sweep.Name}: {w}"));
                var ratio = finesse.Finesse / instrument.Finesse;
                if (ratio > 3 || ratio < 1.0 / 3)
                    warnings.Add($"{sweep.Name}: on the self-calibrated axis the peaks have finesse {finesse.Finesse:F0}, far from the stated {instrument.Finesse:F0}: " +
                                 "either the stated finesse is wrong or the repeats were matched at a wrong period (a source whose pattern nearly repeats within one FSR); check with a calibration sweep");
            }
        }

        var companion = options.Companion;
        var method = ladderUsed is not null
            ? $"self-calibration from repeats one FSR apart ({usedRepeats} pairs) and the transverse families on their Gouy ladder ({ladderUsed.Note})"
            : companion is null
            ? $"self-calibration from repeats one FSR apart ({usedRepeats} pairs)"
            : $"self-calibration from repeats one FSR apart ({usedRepeats} pairs) jointly with the {companion.Method} ({companionPairs.Count(c => c.Used)} intervals)";
        var calibration = new AxisCalibration(instrument.Name, sweep.Direction, sweep.Name, method, final, pointX, pointHz, residualHz, residualRms,
            finesse is { Consistent: true } ? finesse.Finesse : null, finesse is { Consistent: true } ? finesse.Sigma : null, warnings)
        {
            FromRepeats = true,
            PairsUsed = usedPairs.Count,
            PairsRejected = rejected,
            AxisSigmaHz = fit.AxisSigmaHz,
            ShapeCovariance = fit.ShapeCovariance,
            FinesseDetail = finesse,
            PeriodDecision = decision,
        };
        if (decision is not null && Math.Abs(decision.PeriodHz / period - 1) > 1e-9)
        {
            // the data say the period is another multiple of the stated FSR (a near-confocal cavity whose TEM00 repeats
            // every c/2L): the whole axis scales with it
            var factor = decision.PeriodHz / period;
            calibration = calibration.Scaled(factor) with { Warnings = calibration.Warnings.Append($"{sweep.Name}: {decision.Basis}").ToList() };
        }
        var reportPairs = allPairs.Select(c => new RepeatPair(c.XA, c.XB, c.HA, c.HB, c.Delta, c.Sigma, c.Origin, c.Residual, c.Used)).ToList();
        var candidates = runs.Select(r => new PeriodCandidate(r.PeriodSamples, r.Pairs.Count(c => c.Used), r.Coverage, r.HeightMismatch, ReferenceEquals(r, chosen))).ToList();
        return new SelfCalibrationResult(calibration, reportPairs, found, scores, fit.AxisSigmaHz, iterations, initialPeriodSamples, candidates);
    }

    // ------------------------------------------------------------------ period decision

    /// <summary>
    /// Scores the chosen period, its half and its double (and the other starts) against the whole peak pattern
    /// (<see cref="PeriodDecider"/>), splits the groups at the period into source lines and cavity families, and
    /// says which factor to adopt instead of the chosen period (null: keep it).
    /// </summary>
    private static (PeriodDecision Decision, double? AdoptFactor) DecidePeriod(Run chosen, List<Run> runs, List<P> peaks, Sweep sweep, Instrument instrument,
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
        var fwhm = Median(clear.Select(p => p.WidthX * Math.Abs(axis.Derivative(p.X)) / period));
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

        double? adopt = null;
        var one = list.First(c => c.K == 1);
        var dbl = list.First(c => c.K == 2);
        string basis;
        var shorter = list.Where(c => c.K < 0.97 && c.Score.Consistent && c.Score.Predictions > 0).OrderBy(c => c.K).FirstOrDefault();
        if (shorter.Score is not null)
        {
            adopt = shorter.K;
            basis = $"a shorter period ({shorter.Score.Label}) explains every peak as well: the shortest consistent period is the period";
        }
        else if (one.Score.Consistent)
        {
            basis = "the shortest period at which every peak group repeats with the same height";
        }
        else if (dbl.Score.Consistent && dbl.Score.Predictions > 0)
        {
            adopt = 2;
            basis = "only the double of the first repeat period explains every peak";
        }
        else
        {
            basis = "no candidate explains the peak pattern";
        }

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

    /// <summary>The axis refitted to every peak of one source line and its transverse families at once.</summary>
    private sealed record Ladder(Fit Fit, List<DegreeScore> Scores, int Points, string Note)
    {
        /// <summary>χ² per degree of freedom of the chosen degree (points − degree − 2 unknowns).</summary>
        public double ReducedChiSquare => Fit.ChiSquare / Math.Max(1, Points - Fit.Axis.Degree - 2);
    }

    /// <summary>
    /// Refits the axis to the peaks of a single source line and its transverse families on a Gouy ladder. Family N lies
    /// N·o₁ (mod 1) of an FSR from TEM00 (Siegman, <i>Lasers</i>, 1986, ch. 19), so with apparent offsets a_N = N·a₁ − m_N
    /// (m_N whole) every labelled peak i of order k_i and family N_i satisfies f(x_i) = C + FSR·(k_i − m_N) + N_i·A with
    /// two unknowns shared by all peaks (C, the origin; A = FSR·a₁). Repeat pairs use only the distance between equal
    /// families of neighbouring orders; here a family N ≥ 2 next to TEM00 (or next to N = 1) also measures the local slope
    /// of the axis, which pins the shape of a piezo's cubic that a few pairs clustered at two places along the sweep leave
    /// nearly free. Linear least squares in the polynomial's shape coefficients, C and A, weighted by each peak's position
    /// uncertainty; the degree is chosen by leave-one-out cross-validation as for the pairs (at least two degrees of
    /// freedom). Null when the families do not form a ladder with a rung N ≥ 2, when fewer than three families have peaks,
    /// or when no monotone fit results.
    /// </summary>
    private static Ladder? LadderFit(Run chosen, PeriodDecision decision, List<P> peaks, Sweep sweep, SelfCalibrationOptions options, double period,
        double xLo, double xHi)
    {
        if (decision.FundamentalPhase is not double basePhase || chosen.Fit is null) return null;
        var one = decision.Families.FirstOrDefault(f => f.N == 1);
        if (one is null) return null;
        var axis = chosen.Fit.Axis;
        var f0 = axis.Evaluate(xLo);
        var tol = decision.Tolerance;
        // rungs a_N = N·a₁ − m_N; a family off its rung by more than the grouping tolerance is not used
        var rungs = new List<(int N, double A, int M)> { (0, 0, 0) };
        foreach (var fam in decision.Families.Where(f => f.N >= 1))
        {
            var off = fam.N * one.ApparentOffsetFsr - fam.ApparentOffsetFsr;
            var m = (int)Math.Round(off);
            if (Math.Abs(off - m) <= tol) rungs.Add((fam.N, fam.ApparentOffsetFsr, m));
        }

        if (!rungs.Any(r => r.N >= 2)) return null;
        var labelled = new List<(double X, int N, int K, int M, double Sigma)>();
        foreach (var p in peaks)
        {
            var u = (axis.Evaluate(p.X) - f0) / period;
            (int N, int K, int M, double D)? best = null;
            foreach (var r in rungs)
            {
                var v = u - basePhase - r.A;
                var k = (int)Math.Round(v);
                var d = Math.Abs(v - k);
                if (d <= tol && (best is null || d < best.Value.D)) best = (r.N, k, r.M, d);
            }

            if (best is { } l) labelled.Add((p.X, l.N, l.K, l.M, Math.Max(p.SigmaX * Math.Abs(axis.Derivative(p.X)), 1e-9 * period)));
        }

        // one peak per label; two peaks claiming one label are both left out
        var pts = labelled.GroupBy(q => (q.N, q.K)).Where(g => g.Count() == 1).Select(g => g.First()).OrderBy(q => q.X).ToList();
        if (pts.Select(q => q.N).Distinct().Count() < 3) return null;
        var n = pts.Count;
        var lo = pts[0].X;
        var hi = pts[^1].X;
        var centre = 0.5 * (lo + hi);
        var half = 0.5 * (hi - lo);
        if (!(half > 0)) return null;
        var maxDegree = Math.Min(options.MaxDegree, n - 4); // d shape coefficients + C + A, at least two degrees of freedom
        var fits = new List<Fit>();
        var scores = new List<DegreeScore>();
        for (var deg = 1; deg <= maxDegree; deg++)
        {
            var cols = deg + 2;
            var a = Matrix<double>.Build.Dense(n, cols);
            var b = Vector<double>.Build.Dense(n);
            for (var i = 0; i < n; i++)
            {
                var q = pts[i];
                var w = 1 / q.Sigma;
                var t = (q.X - centre) / half;
                var pw = t;
                for (var j = 0; j < deg; j++)
                {
                    a[i, j] = w * pw;
                    pw *= t;
                }

                a[i, deg] = w;
                a[i, deg + 1] = w * q.N;
                b[i] = w * period * (q.K - q.M);
            }

            var qr = a.QR(MathNet.Numerics.LinearAlgebra.Factorization.QRMethod.Thin);
            var rank = true;
            for (var j = 0; j < cols; j++)
                if (Math.Abs(qr.R[j, j]) < 1e-10 * Math.Abs(qr.R[0, 0])) rank = false;
            if (!rank) break;
            var sol = qr.Solve(b);
            var coefficients = new double[deg + 1];
            for (var j = 1; j <= deg; j++) coefficients[j] = sol[j - 1];
            var tRef = (sweep.X[0] - centre) / half;
            var c0 = 0.0;
            for (var j = deg; j >= 1; j--) c0 = (c0 + coefficients[j]) * tRef;
            coefficients[0] = -c0;
            var poly = new AxisPolynomial(coefficients, centre, half, lo, hi);
            var resid = a * sol - b;
            var chi = resid.DotProduct(resid);
            var leverage = new double[n];
            var press = 0.0;
            for (var i = 0; i < n; i++)
            {
                var h = 0.0;
                for (var j = 0; j < cols; j++) h += qr.Q[i, j] * qr.Q[i, j];
                leverage[i] = Math.Min(h, 0.99);
                press += Math.Pow(resid[i] / (1 - leverage[i]), 2);
            }

            double sigma = double.NaN;
            double[]? shapeCovariance = null;
            try
            {
                var cov = a.TransposeThisAndMultiply(a).Inverse() * (chi / (n - cols));
                var flat = new double[deg * deg];
                for (var i = 0; i < deg; i++)
                for (var j = 0; j < deg; j++)
                    flat[i * deg + j] = cov[i, j];
                if (flat.All(double.IsFinite))
                {
                    sigma = AxisPolynomial.ShapeSigmaRms(flat, deg);
                    shapeCovariance = flat;
                }
            }
            catch (Exception e) when (e is ArgumentException or InvalidOperationException)
            {
                sigma = double.NaN;
            }

            var mono = poly.IsMonotone(lo, hi, 801);
            scores.Add(new DegreeScore(deg, chi, Bic(chi, n, deg, period), press, mono));
            if (mono && double.IsFinite(press)) fits.Add(new Fit(poly, chi, sigma, leverage, press) { ShapeCovariance = shapeCovariance });
        }

        if (fits.Count == 0) return null;
        var minPress = fits.Min(f => f.Press);
        var chosenFit = fits.First(f => f.Press <= 1.05 * minPress + 1e-12);
        var dof = n - chosenFit.Axis.Degree - 2;
        var note = $"{n} peaks of {pts.Select(q => q.N).Distinct().Count()} families, reduced χ² {chosenFit.ChiSquare / dof:G3}";
        return new Ladder(chosenFit, scores, n, note);
    }

    private static InputException Undecided(Sweep sweep, PeriodDecision d, string why) =>
        new($"{sweep.Name}: the period of the sweep is not decided ({why}). Candidates: " +
            string.Join("; ", d.Candidates.Select(c => $"{c.Label} {c.PeriodScan:G4} scan units (explains {c.Explained:P0} of {c.Predictions} predicted repeats, alternate heights agree {c.HeightAgreement:F2})")) +
            ". What would settle it: a [[calibration]] sweep with a single-frequency laser, a stated interval between two lines (known_interval in [solve]), " +
            "the mirror radii of the cavity (mirror_radius), or the other ramp direction", sweep.Source);

    // ------------------------------------------------------------------ rounds

    private sealed record Run(List<Cand> Pairs, Fit? Fit, List<DegreeScore> Scores, int Iterations, double Coverage, double HeightMismatch,
        double PeriodSamples, List<(Cand Pair, (bool Used, double Residual) State)> CompanionStateList)
    {
        public IEnumerable<(Cand, (bool Used, double Residual))> CompanionState => CompanionStateList.Select(t => (t.Pair, t.State));
    }

    /// <summary>Rounds of pairing and fitting from one starting axis, with a window that narrows as the axis improves.</summary>
    private static Run Rounds(List<P> peaks, List<Cand> companionPairs, AxisPolynomial axis, double rmsHz, double delta, Sweep sweep,
        SelfCalibrationOptions options, double xLo, double xHi, double noise)
    {
        List<Cand> pairs = [];
        List<DegreeScore> scores = [];
        Fit? fit = null;
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
            var matched = Match(peaks, axis, delta, widthFactor, rmsHz, shape, xLo, xHi, model);
            if (matched.Count < 1)
            {
                if (round > 0) (fit, pairs) = (null, []); // what the first round paired does not hold up
                break;
            }

            pairs = matched;
            var all = pairs.Concat(companionPairs).ToList();
            (fit, scores) = FitWithRejection(all, sweep, options, xLo, xHi);
            axis = fit.Axis;
            var used = all.Where(c => c.Used).ToList();
            rmsHz = Math.Max(Math.Sqrt(used.Sum(c => c.Residual * c.Residual) / Math.Max(1, used.Count)), 1e-6 * Math.Abs(delta));
            var key = pairs.Where(c => c.Used).Select(c => (c.A, c.B)).ToHashSet();
            if (round >= 2 && previous is not null && key.SetEquals(previous)) break;
            previous = key;
        }

        // coverage: the share of peaks that could have a repeat inside the sweep and have one
        double coverage = 0, mismatch = double.PositiveInfinity;
        if (fit is not null)
        {
            var fA = fit.Axis.Evaluate(xLo);
            var fB = fit.Axis.Evaluate(xHi);
            var (fMin, fMax) = (Math.Min(fA, fB), Math.Max(fA, fB));
            var period = Math.Abs(delta);
            var paired = new HashSet<int>();
            foreach (var c in pairs.Where(c => c.Used))
            {
                paired.Add(c.A);
                paired.Add(c.B);
            }

            // weighted by height: a weak peak's repeat may sink into the noise
            double eligible = 0, hit = 0;
            for (var i = 0; i < peaks.Count; i++)
            {
                var f = fit.Axis.Evaluate(peaks[i].X);
                if (!(f + period <= fMax - 0.01 * period || f - period >= fMin + 0.01 * period)) continue;
                eligible += peaks[i].Height;
                if (paired.Contains(i)) hit += peaks[i].Height;
            }

            coverage = eligible > 0 ? hit / eligible : 0;
            // height mismatch in units of its noise, about a linear trend along the sweep (laser power drift):
            // about 0.7 for true repeats, many times that for look-alikes of other heights
            var used = pairs.Where(c => c.Used && c.A >= 0).ToList();
            if (used.Count > 0)
            {
                var model = used.Count >= 4 ? HeightModel.From(used) : null;
                var z = used.Select(c =>
                {
                    var trend = model is null ? 0 : model.Intercept + model.Slope * c.XA;
                    var sigma = Math.Sqrt(Sq(noise / c.HA) + Sq(noise / c.HB)) + 1e-4;
                    return Math.Abs(Math.Log(c.HB / c.HA) - trend) / sigma;
                }).OrderBy(v => v).ToList();
                mismatch = z[z.Count / 2];
            }
        }

        var periodSamples = fit is null ? double.NaN : SamplesPerPeriod(sweep, fit.Axis, Math.Abs(delta));
        var state = companionPairs.Select(c => (c, (c.Used, c.Residual))).ToList();
        return new Run(pairs, fit, scores, iterations, coverage, mismatch, periodSamples, state);
    }

    /// <summary>
    /// Picks the period among the runs: the true period pairs every feature with a repeat of the same height, so
    /// its height ratios are closest to one and it pairs nearly every peak that can have a repeat; of the runs that
    /// do about equally well (whole multiples of the period), the shortest period is the period.
    /// </summary>
    private static Run Choose(List<Run> runs, List<P> peaks, double delta, double xLo, double xHi)
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

    // ------------------------------------------------------------------ starting axis

    /// <summary>
    /// Local autocorrelation: windows of a twelfth of the sweep (at least 0.4 of the period the stated finesse
    /// suggests) are compared with the sweep at every lag in a range set by the peak widths and the stated finesse,
    /// by the similarity 2⟨u,v⟩/(|u|²+|v|²), which is 1 only for an exact repeat; each window's best lag (the shortest
    /// of its near-equal multiples) says where its content repeats. Those repeat positions are fitted like pairs.
    /// </summary>
    private static (AxisPolynomial Axis, double RmsHz, double PeriodSamples) StartFromCorrelation(Sweep sweep, Instrument instrument, double period,
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

        if (lagMax <= lagMin + 2) throw NoRepeats(sweep, instrument, period, -1);
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

        if (xs.Count == 0) throw NoRepeats(sweep, instrument, period, -1);

        // robust: the lag that the most windows agree on (within 8 %), weighted by how well each window repeats
        // (similarity⁴: a window whose repeat lies beyond the end of the sweep finds only a look-alike, at lower
        // similarity); windows whose lag disagrees with it are dropped
        var medLag = Enumerable.Range(0, xs.Count)
            .Select(i => (Lag: lagsFound[i], Support: Enumerable.Range(0, xs.Count).Where(j => Math.Abs(lagsFound[j] / lagsFound[i] - 1) < 0.08).Sum(j => xs[j].Weight * xs[j].Weight)))
            .MaxBy(t => t.Support).Lag;
        medLag = Median(Enumerable.Range(0, xs.Count).Where(i => Math.Abs(lagsFound[i] / medLag - 1) < 0.08).Select(i => lagsFound[i]));
        var keep = Enumerable.Range(0, xs.Count).Where(i => Math.Abs(lagsFound[i] / medLag - 1) < 0.08).ToList();
        if (keep.Count == 0) throw NoRepeats(sweep, instrument, period, -1);
        var cands = keep.Select((i, k) => new Cand(-1 - k, -1 - k, xs[i].XLo, xs[i].XHi, 1, 1, delta, 0.01 * period / Math.Sqrt(xs[i].Weight), "window")).ToList();
        var maxDegree = Math.Min(3, Math.Max(1, cands.Count - 2));
        Fit? bestFit = null;
        var bestBic = double.PositiveInfinity;
        var xLo = Math.Min(sweep.X[0], sweep.X[^1]);
        var xHi = Math.Max(sweep.X[0], sweep.X[^1]);
        for (var d = 1; d <= maxDegree; d++)
        {
            var f = Solve(cands, d, sweep.X[0], xLo, xHi);
            if (f is null || !f.Axis.IsMonotone(xLo, xHi, 401)) continue;
            var bic = Bic(f.ChiSquare, cands.Count, d, period);
            if (bic < bestBic - 1e-9)
            {
                bestBic = bic;
                bestFit = f;
            }
        }

        if (bestFit is null) throw NoRepeats(sweep, instrument, period, -1);
        var res = cands.Select(c => c.Delta - (bestFit.Axis.Evaluate(c.XB) - bestFit.Axis.Evaluate(c.XA))).ToList();
        var rms = Math.Sqrt(res.Sum(r => r * r) / res.Count);
        return (bestFit.Axis, Math.Max(rms, 0.003 * period), medLag);
    }

    // ------------------------------------------------------------------ pairing

    private sealed record P(Peak Peak, double WidthX, double SigmaX)
    {
        public double X => Peak.X;
        public double Height => Peak.Height;
    }

    private sealed class Cand(int a, int b, double xa, double xb, double ha, double hb, double delta, double sigma, string origin)
    {
        public int A { get; } = a;
        public int B { get; } = b;
        public double XA { get; } = xa;
        public double XB { get; } = xb;
        public double HA { get; } = ha;
        public double HB { get; } = hb;
        public double Delta { get; } = delta;
        public double Sigma { get; set; } = sigma;
        public string Origin { get; } = origin;
        public double Residual { get; set; }
        public bool Used { get; set; } = true;
    }

    /// <summary>How the height ratio of true repeats runs along the sweep: ln(h_b/h_a) ≈ Intercept + Slope·x within Tolerance
    /// (a drifting laser power tilts it; noise spreads it).</summary>
    private sealed record HeightModel(double Intercept, double Slope, double Tolerance)
    {
        public bool Accepts(double x, double ratio) => Math.Abs(Math.Log(ratio) - (Intercept + Slope * x)) <= Tolerance;

        public static HeightModel? From(List<Cand> pairs)
        {
            var used = pairs.Where(c => c.Used && c.A >= 0).ToList();
            if (used.Count < 4) return null;
            var xs = used.Select(c => c.XA).ToArray();
            var ys = used.Select(c => Math.Log(c.HB / c.HA)).ToArray();
            var mx = xs.Average();
            var my = ys.Average();
            var sxx = xs.Sum(x => (x - mx) * (x - mx));
            var slope = sxx > 0 ? xs.Zip(ys, (x, y) => (x - mx) * (y - my)).Sum() / sxx : 0;
            var intercept = my - slope * mx;
            var dev = xs.Zip(ys, (x, y) => Math.Abs(y - intercept - slope * x)).OrderBy(v => v).ToArray();
            var sigma = 1.4826 * dev[dev.Length / 2];
            return new HeightModel(intercept, slope, Math.Max(5 * sigma, 0.03));
        }
    }

    private static List<Cand> Match(List<P> peaks, AxisPolynomial axis, double delta, double widthFactor, double axisRmsHz, double shapeTolerance,
        double xLo, double xHi, HeightModel? heights = null)
    {
        var xsSorted = peaks.Select(p => p.X).ToArray();
        var byB = new Dictionary<int, (Cand Pair, double Distance)>();
        for (var a = 0; a < peaks.Count; a++)
        {
            var pa = peaks[a];
            var fa = axis.Evaluate(pa.X);
            var target = fa + delta;
            var xt = Inverse(axis, target, xLo, xHi);
            if (xt is not double x || x <= pa.X) continue;
            var slope = Math.Abs(axis.Derivative(x));
            if (!(slope > 0)) continue;
            var tol = widthFactor * pa.WidthX + 3 * axisRmsHz / slope;
            tol = Math.Min(tol, 0.1 * (x - pa.X));
            var lo = LowerBound(xsSorted, x - tol);
            int? best = null;
            double bestD = double.PositiveInfinity, secondD = double.PositiveInfinity;
            for (var b = lo; b < peaks.Count && peaks[b].X <= x + tol; b++)
            {
                if (b == a) continue;
                var pb = peaks[b];
                var hr = pb.Height / pa.Height;
                var wr = pb.WidthX / pa.WidthX;
                if (hr > shapeTolerance || hr < 1 / shapeTolerance || wr > shapeTolerance || wr < 1 / shapeTolerance) continue;
                if (heights is not null && !heights.Accepts(pa.X, hr)) continue;
                var d = Math.Abs(pb.X - x);
                if (d < bestD)
                {
                    secondD = bestD;
                    bestD = d;
                    best = b;
                }
                else if (d < secondD)
                {
                    secondD = d;
                }
            }

            if (best is not int bi) continue;
            if (secondD < 2 * bestD + 0.5 * pa.WidthX && secondD <= tol) continue; // two look-alikes in the window: ambiguous
            var pb2 = peaks[bi];
            var sigma = Math.Sqrt(Sq(pa.SigmaX * Math.Abs(axis.Derivative(pa.X))) + Sq(pb2.SigmaX * slope));
            var cand = new Cand(a, bi, pa.X, pb2.X, pa.Height, pb2.Height, delta, Math.Max(sigma, 1e-9 * Math.Abs(delta)), "repeat");
            if (byB.TryGetValue(bi, out var have) && have.Distance <= bestD) continue;
            byB[bi] = (cand, bestD);
        }

        return byB.Values.Select(v => v.Pair).OrderBy(c => c.XA).ToList();
    }

    /// <summary>The calibration sweep's peaks as intervals between neighbours (each one known in Hz).</summary>
    private static List<Cand> CompanionPairs(AxisCalibration? companion, Instrument instrument)
    {
        if (companion is null || companion.PointCount < 2) return [];
        var order = Enumerable.Range(0, companion.PointCount).OrderBy(i => companion.PointX[i]).ToArray();
        var sigma = Math.Max(double.IsFinite(companion.ResidualRmsHz) ? companion.ResidualRmsHz : 0, 0.01 * instrument.LinewidthHz);
        var list = new List<Cand>();
        for (var k = 1; k < order.Length; k++)
        {
            var i = order[k - 1];
            var j = order[k];
            list.Add(new Cand(-100 - k, -100 - k, companion.PointX[i], companion.PointX[j], 1, 1, companion.PointHz[j] - companion.PointHz[i], sigma, "calibration"));
        }

        return list;
    }

    // ------------------------------------------------------------------ fitting

    private sealed record Fit(AxisPolynomial Axis, double ChiSquare, double AxisSigmaHz, double[] Leverage, double Press)
    {
        /// <summary>Covariance of c₁…c_d (row-major, Hz²), scaled by χ² per degree of freedom; null when not computable.</summary>
        public double[]? ShapeCovariance { get; init; }
    }

    private static (Fit Fit, List<DegreeScore> Scores) FitWithRejection(List<Cand> all, Sweep sweep, SelfCalibrationOptions options, double xLo, double xHi)
    {
        foreach (var c in all) c.Used = true;
        Fit? fit = null;
        List<DegreeScore> scores = [];
        for (var pass = 0; pass < 6; pass++)
        {
            var used = all.Where(c => c.Used).ToList();
            (fit, scores) = ChooseDegree(used, sweep, options, xLo, xHi);
            foreach (var c in all) c.Residual = c.Delta - (fit.Axis.Evaluate(c.XB) - fit.Axis.Evaluate(c.XA));
            // deleted (leave-one-out) residuals: r / (1 − h) for the constraints in the fit, r for those left out
            var lev = new Dictionary<Cand, double>(ReferenceEqualityComparer.Instance);
            for (var k = 0; k < used.Count && k < fit.Leverage.Length; k++) lev[used[k]] = fit.Leverage[k];
            double Deleted(Cand c) => Math.Abs(c.Residual) / c.Sigma / (1 - lev.GetValueOrDefault(c, 0));
            var normalised = used.Select(Deleted).OrderBy(v => v).ToList();
            var scale = 1.4826 * normalised[normalised.Count / 2];
            if (!(scale > 0)) break;
            var limit = options.RejectSigma * scale;
            var changed = false;
            foreach (var c in all)
            {
                var keep = Deleted(c) <= limit;
                if (keep != c.Used)
                {
                    c.Used = keep;
                    changed = true;
                }
            }

            if (all.Count(c => c.Used) < 2)
            {
                foreach (var c in all) c.Used = true;
                break;
            }

            if (!changed) break;
        }

        return (fit!, scores);
    }

    private static (Fit Fit, List<DegreeScore> Scores) ChooseDegree(List<Cand> used, Sweep sweep, SelfCalibrationOptions options, double xLo, double xHi)
    {
        var n = used.Count;
        var period = used.Max(c => Math.Abs(c.Delta));
        var scores = new List<DegreeScore>();
        if (options.Degree is int d)
        {
            if (d < 1) throw new InputException($"axis degree must be at least 1 but got {d}");
            if (n < d + 1)
                throw new InputException($"{sweep.Name}: {n} calibration constraints (repeat pairs and calibration peaks) are too few for a degree-{d} axis (needs at least {d + 1}); lower the degree or sweep over more FSRs", sweep.Source);
            var f = Solve(used, d, sweep.X[0], xLo, xHi)
                    ?? throw new InputException($"{sweep.Name}: the repeat pairs cannot determine a degree-{d} axis (they cover too little of the sweep)", sweep.Source);
            var mono = f.Axis.IsMonotone(f.Axis.XMin, f.Axis.XMax, 801);
            scores.Add(new DegreeScore(d, f.ChiSquare, Bic(f.ChiSquare, n, d, period), f.Press, mono));
            if (!mono)
                throw new InputException($"{sweep.Name}: the fitted degree-{d} axis is not monotone over the sweep; lower the degree", sweep.Source);
            return (f, scores);
        }

        // degree by leave-one-out cross-validation over the constraints (PRESS); of degrees that predict about
        // as well (within 5 %), the lowest: a high degree on few pairs bends at the ends, which PRESS sees
        var fits = new List<Fit>();
        var maxDegree = Math.Max(1, Math.Min(options.MaxDegree, n - 2));
        for (var deg = 1; deg <= maxDegree; deg++)
        {
            var f = Solve(used, deg, sweep.X[0], xLo, xHi);
            if (f is null) break;
            var mono = f.Axis.IsMonotone(f.Axis.XMin, f.Axis.XMax, 801);
            scores.Add(new DegreeScore(deg, f.ChiSquare, Bic(f.ChiSquare, n, deg, period), f.Press, mono));
            if (mono && double.IsFinite(f.Press)) fits.Add(f);
        }

        Fit? best = null;
        if (fits.Count > 0)
        {
            var minPress = fits.Min(f => f.Press);
            best = fits.First(f => f.Press <= 1.05 * minPress + 1e-12);
        }

        if (best is null)
            throw new InputException($"{sweep.Name}: no monotone axis polynomial fits the {n} repeat pairs; the sweep may not be a single ramp or the repeats were mismatched. Add a [[calibration]] sweep for this instrument", sweep.Source);
        return (best, scores);
    }

    private static double Bic(double chi, int n, int degree, double period)
    {
        // χ² is whitened (dimensionless); the floor keeps a noiseless fit from scoring −∞
        var floor = n * 1e-8;
        return n * Math.Log(Math.Max(chi, floor) / n) + degree * Math.Log(n);
    }

    /// <summary>
    /// Weighted least squares on the coefficients c₁…c_d of f(t) = Σ cᵢ tⁱ from constraints
    /// Σ cᵢ (t_bⁱ − t_aⁱ) = Δ; c₀ makes f(x_ref) = 0. Null when the system is rank-deficient.
    /// </summary>
    private static Fit? Solve(List<Cand> used, int degree, double xRef, double xLo, double xHi)
    {
        var n = used.Count;
        if (n < degree) return null;
        var lo = used.Min(c => c.XA);
        var hi = used.Max(c => c.XB);
        var centre = 0.5 * (lo + hi);
        var half = 0.5 * (hi - lo);
        if (!(half > 0)) return null;
        var a = Matrix<double>.Build.Dense(n, degree);
        var b = Vector<double>.Build.Dense(n);
        for (var k = 0; k < n; k++)
        {
            var c = used[k];
            var w = 1 / c.Sigma;
            var ta = (c.XA - centre) / half;
            var tb = (c.XB - centre) / half;
            double pa = ta, pb = tb;
            for (var i = 1; i <= degree; i++)
            {
                a[k, i - 1] = w * (pb - pa);
                pa *= ta;
                pb *= tb;
            }

            b[k] = w * c.Delta;
        }

        var qr = a.QR(MathNet.Numerics.LinearAlgebra.Factorization.QRMethod.Thin);
        var r = qr.R;
        for (var i = 0; i < degree; i++)
            if (Math.Abs(r[i, i]) < 1e-10 * Math.Abs(r[0, 0])) return null;
        var sol = qr.Solve(b);
        var coefficients = new double[degree + 1];
        for (var i = 1; i <= degree; i++) coefficients[i] = sol[i - 1];
        var tRef = (xRef - centre) / half;
        var c0 = 0.0;
        for (var i = degree; i >= 1; i--) c0 = (c0 + coefficients[i]) * tRef;
        coefficients[0] = -c0;
        var axis = new AxisPolynomial(coefficients, centre, half, lo, hi);
        var resid = a * sol - b;
        var chi = resid.DotProduct(resid);

        // uncertainty of the axis shape (constant removed), averaged over the calibrated range
        double sigma = double.NaN;
        double[]? shapeCovariance = null;
        try
        {
            var cov = (a.TransposeThisAndMultiply(a)).Inverse() * (n > degree ? chi / (n - degree) : 1.0);
            if (cov.Enumerate().All(double.IsFinite))
            {
                var flat = new double[degree * degree];
                for (var i = 0; i < degree; i++)
                for (var j = 0; j < degree; j++)
                    flat[i * degree + j] = cov[i, j];
                sigma = AxisPolynomial.ShapeSigmaRms(flat, degree);
                if (n > degree) shapeCovariance = flat;
            }
        }
        catch (Exception e) when (e is ArgumentException or InvalidOperationException)
        {
            sigma = double.NaN;
        }

        // leverage of each constraint (diagonal of the hat matrix): an edge pair can bend the polynomial to itself
        var q = qr.Q;
        var leverage = new double[n];
        for (var k = 0; k < n; k++)
        {
            var h = 0.0;
            for (var j = 0; j < degree; j++) h += q[k, j] * q[k, j];
            leverage[k] = Math.Min(h, 0.99);
        }

        // leave-one-out prediction error (PRESS): each constraint predicted by the fit to all the others
        var press = 0.0;
        for (var k = 0; k < n; k++) press += Math.Pow(resid[k] / (1 - leverage[k]), 2);
        return new Fit(axis, chi, sigma, leverage, press) { ShapeCovariance = shapeCovariance };
    }

    // ------------------------------------------------------------------ diagnostics

    /// <summary>
    /// Stretches of about one period where most clear peaks have no repeat one period later (or earlier) although
    /// the repeat would lie inside the sweep: the source changed there (a mode hop) or the peaks are not source lines.
    /// </summary>
    private static IEnumerable<string> UnrepeatedStretches(Sweep sweep, List<P> peaks, List<Cand> pairs, AxisPolynomial axis, double delta, double xLo, double xHi)
    {
        if (peaks.Count < 6) yield break;
        var forward = new bool[peaks.Count];
        var backward = new bool[peaks.Count];
        foreach (var c in pairs.Where(c => c.Used && c.A >= 0))
        {
            forward[c.A] = true;
            backward[c.B] = true;
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

    private static InputException NoRepeats(Sweep sweep, Instrument instrument, double period, int peakCount)
    {
        var found = peakCount >= 0 ? $"{peakCount} peaks were found but " : "";
        return new InputException(
            $"{sweep.Name}: no repeats found: {found}no feature of the sweep recurs one period later at any spacing from a few peak widths up to the whole record " +
            $"(the period sought is the FSR, {Quantity.FormatFrequency(period)}). Self-calibration needs a stable source and a sweep over more than one FSR; " +
            "add a [[calibration]] sweep for this instrument, or check the signal column", sweep.Source);
    }

    // ------------------------------------------------------------------ helpers

    /// <summary>x where the monotone axis takes the value f, by bisection on [lo, hi]; null when outside.</summary>
    public static double? Inverse(AxisPolynomial axis, double f, double lo, double hi)
    {
        var flo = axis.Evaluate(lo) - f;
        var fhi = axis.Evaluate(hi) - f;
        if (Math.Sign(flo) == Math.Sign(fhi) && flo != 0 && fhi != 0) return null;
        for (var i = 0; i < 80; i++)
        {
            var mid = 0.5 * (lo + hi);
            var fm = axis.Evaluate(mid) - f;
            if (fm == 0) return mid;
            if (Math.Sign(fm) == Math.Sign(flo))
            {
                lo = mid;
                flo = fm;
            }
            else
            {
                hi = mid;
            }
        }

        return 0.5 * (lo + hi);
    }

    private static double SamplesPerPeriod(Sweep sweep, AxisPolynomial axis, double period)
    {
        var mid = sweep.Count / 2;
        var dxdi = Math.Abs(sweep.X[Math.Min(sweep.Count - 1, mid + 1)] - sweep.X[mid]);
        var slope = Math.Abs(axis.Derivative(sweep.X[mid]));
        return slope > 0 && dxdi > 0 ? period / (slope * dxdi) : double.NaN;
    }

    private static double WidthX(Sweep sweep, Peak p)
    {
        var i = (int)Math.Clamp(Math.Round(p.Position), 1, sweep.Count - 2);
        return Math.Max(1e-300, p.WidthSamples * Math.Abs(sweep.X[i + 1] - sweep.X[i - 1]) / 2);
    }

    /// <summary>Position uncertainty of a peak in x: about FWHM·σ/(h·√samples-per-FWHM), floored at 0.5 % of the FWHM.</summary>
    private static double PositionSigmaX(Sweep sweep, Peak p, double noise)
    {
        var w = WidthX(sweep, p);
        var rel = 0.6 * noise / Math.Max(p.Height, 1e-300) / Math.Sqrt(Math.Max(1, p.WidthSamples));
        return w * Math.Max(rel, 0.005);
    }

    private static int LowerBound(double[] sorted, double value)
    {
        int lo = 0, hi = sorted.Length;
        while (lo < hi)
        {
            var mid = (lo + hi) / 2;
            if (sorted[mid] < value) lo = mid + 1;
            else hi = mid;
        }

        return lo;
    }

    private static double Median(IEnumerable<double> values)
    {
        var a = values.Where(double.IsFinite).OrderBy(v => v).ToArray();
        return a.Length == 0 ? double.NaN : a[a.Length / 2];
    }

    private static double Sq(double v) => v * v;
}
