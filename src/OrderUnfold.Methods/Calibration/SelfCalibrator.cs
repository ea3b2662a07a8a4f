using OrderUnfold.Units;

namespace OrderUnfold.Calibration;

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

    /// <summary>What every stage of one self-calibration shares.</summary>
    private sealed record Setting(Sweep Sweep, Instrument Instrument, SelfCalibrationOptions Options, double Period, double Delta, double Noise,
        IReadOnlyList<Peak> Found, List<DetectedPeak> Peaks, List<RepeatConstraint> CompanionPairs, double XLo, double XHi)
    {
        /// <summary>Pairing rounds from one starting axis.</summary>
        public PairingRun Rounds(AxisPolynomial axis, double rmsHz) =>
            RepeatRounds.Rounds(Peaks, CompanionPairs, axis, rmsHz, Delta, Sweep, Options, XLo, XHi, Noise);

        public InputException NoRepeats() => SelfCalibrator.NoRepeats(Sweep, Instrument, Period, Peaks.Count);

        public (PeriodDecision Decision, double? AdoptFactor) DecidePeriod(PairingRun chosen, List<PairingRun> runs) =>
            RepeatPeriodChoice.DecidePeriod(chosen, runs, Peaks, Sweep, Instrument, Period, XLo, XHi);
    }

    /// <summary>Self-calibrates one sweep segment (x relative to the segment start for time scans); a cancelled
    /// <paramref name="cancellationToken"/> stops it between its pairing runs.</summary>
    /// <exception cref="InputException">The sweep is too short, has no repeats, or the constraints cannot support the axis.</exception>
    /// <exception cref="OperationCanceledException"><paramref name="cancellationToken"/> was cancelled.</exception>
    public static SelfCalibrationResult Calibrate(Sweep sweep, Instrument instrument, SelfCalibrationOptions? options = null,
        CancellationToken cancellationToken = default)
    {
        cancellationToken.ThrowIfCancellationRequested();
        var setting = Prepare(sweep, instrument, options ?? new SelfCalibrationOptions());
        var warnings = new List<string>();
        var (starts, initialPeriodSamples) = StartingAxes(setting);
        var runs = new List<PairingRun>();
        InputException? firstError = null;
        foreach (var (axis0, rms0) in starts)
        {
            cancellationToken.ThrowIfCancellationRequested();
            try
            {
                runs.Add(setting.Rounds(axis0, rms0));
            }
            catch (InputException e)
            {
                firstError ??= e;
            }
        }

        if (runs.All(r => r.Fit is null)) throw firstError ?? setting.NoRepeats();
        cancellationToken.ThrowIfCancellationRequested();
        var chosen = RepeatPeriodChoice.Choose(runs, setting.Peaks, setting.Delta, setting.XLo, setting.XHi);
        if (chosen.Fit is null || chosen.Pairs.Count == 0) throw setting.NoRepeats();
        var decision = SettlePeriod(setting, runs, ref chosen);
        var ladder = TryFamilyLadder(setting, runs, ref chosen, ref decision, warnings);
        if (decision is not null) CheckThePeriodExplainsThePeaks(sweep, decision, warnings);
        return Result(setting, runs, chosen, decision, ladder, initialPeriodSamples, warnings);
    }

    private static Setting Prepare(Sweep sweep, Instrument instrument, SelfCalibrationOptions options)
    {
        var period = options.PeriodHz ?? instrument.FsrHz;
        if (!(period > 0)) throw new ArgumentException("the repeat period must be positive", nameof(options));
        if (sweep.Count < 64)
            throw new InputException($"{sweep.Name}: {sweep.Count} samples are too few to self-calibrate (needs at least 64)", sweep.Source);
        var sign = sweep.Direction == RampDirection.Down && sweep.Scan == ScanCoordinate.Time ? -1.0 : 1.0;
        var noise = NoiseEstimator.FirstDifferenceSigma(sweep.Y);
        var found = ResolvedPeaks.Find(sweep.X, sweep.Y, options.MinHeightFraction, options.MinSnr);
        var peaks = found.Select(p => DetectedPeak.From(sweep, p, noise)).OrderBy(p => p.X).ToList();
        if (peaks.Count < 2)
            throw new InputException($"{sweep.Name}: found {peaks.Count} peak(s); self-calibration needs peaks that repeat one FSR apart. " +
                                     "Check the signal column, or add a [[calibration]] sweep for this instrument", sweep.Source);
        var companionPairs = RepeatMatching.CompanionPairs(options.Companion, instrument);
        return new Setting(sweep, instrument, options, period, sign * period, noise, found, peaks, companionPairs,
            Math.Min(sweep.X[0], sweep.X[^1]), Math.Max(sweep.X[0], sweep.X[^1]));
    }

    /// <summary>
    /// The starting axes and the candidate periods they allow: a given axis (or the calibration sweep's) is one start; it may
    /// be good only near the calibration peaks, so the sweep's own autocorrelation over every lag, and (a hint only) over the
    /// lags the stated finesse and the peak widths suggest, gives further starts; the pairs decide between them.
    /// </summary>
    private static (List<(AxisPolynomial Axis, double RmsHz)> Starts, double InitialPeriodSamples) StartingAxes(Setting setting)
    {
        var (sweep, instrument, options, period) = (setting.Sweep, setting.Instrument, setting.Options, setting.Period);
        var medianWidthSamples = Medians.UpperOfFinite(setting.Found.Select(p => p.WidthSamples));
        var starts = new List<(AxisPolynomial Axis, double RmsHz)>();
        var initialPeriodSamples = double.NaN;
        if (options.InitialAxis is not null || options.Companion is not null)
        {
            var axis0 = options.InitialAxis ?? options.Companion!.Axis;
            var rms0 = Math.Max(options.Companion?.ResidualRmsHz is double r && double.IsFinite(r) ? r : 0, 0.02 * period);
            starts.Add((axis0, rms0));
            initialPeriodSamples = RepeatRounds.SamplesPerPeriod(sweep, axis0, period);
        }

        var hint = instrument.Finesse * medianWidthSamples * period / instrument.FsrHz;
        InputException? correlationError = null;
        foreach (var prior in new double?[] { null, hint > 3 * medianWidthSamples && hint < sweep.Count ? hint : null }.Distinct())
        try
        {
            var (axis0, rms0, lag) = CorrelationStart.StartFromCorrelation(sweep, instrument, period, setting.Delta, medianWidthSamples, prior);
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

        if (starts.Count == 0) throw correlationError ?? setting.NoRepeats();
        return (starts, initialPeriodSamples);
    }

    /// <summary>
    /// The period from the whole peak pattern: the half and the double of the chosen period are tested explicitly; a
    /// consistent shorter period replaces the chosen one (its rounds are run and become <paramref name="chosen"/>), and a
    /// pattern no candidate explains is refused.
    /// </summary>
    private static PeriodDecision? SettlePeriod(Setting setting, List<PairingRun> runs, ref PairingRun chosen)
    {
        PeriodDecision? decision = null;
        for (var attempt = 0; attempt < 2; attempt++)
        {
            var (d, adoptFactor) = setting.DecidePeriod(chosen, runs);
            decision = d;
            if (adoptFactor is not double k) break;
            PairingRun? adopted;
            try
            {
                adopted = setting.Rounds(chosen.Fit!.Axis.Scaled(1 / k), Math.Max(chosen.Fit.AxisSigmaHz, 0.01 * setting.Period));
            }
            catch (InputException)
            {
                adopted = null;
            }

            if (adopted?.Fit is null || adopted.Pairs.Count(c => c.Used) == 0)
                throw Undecided(setting.Sweep, d, $"a period {k:G3} times the first explains the peaks but its repeats could not be fitted");
            runs.Add(adopted);
            chosen = adopted;
        }

        return decision;
    }

    /// <summary>
    /// Transverse families on the rungs of a Gouy ladder (N·a) tie the peaks of each order together: the axis is refitted to
    /// every labelled peak at once, with the ladder's one offset free (<see cref="FamilyLadderFit"/>); kept when it explains
    /// the peaks at least as well as the pairs do and the period decision stands on it. Null when not used.
    /// </summary>
    private static Ladder? TryFamilyLadder(Setting setting, List<PairingRun> runs, ref PairingRun chosen, ref PeriodDecision? decision, List<string> warnings)
    {
        var options = setting.Options;
        if (decision is null || !options.UseFamilyLadder || options.Degree is not null || setting.CompanionPairs.Count != 0 ||
            FamilyLadderFit.LadderFit(chosen, decision, setting.Peaks, setting.Sweep, options, setting.Period, setting.XLo, setting.XHi) is not { } ladder)
            return null;
        var before = chosen.Pairs.Select(c => c.Residual).ToList();
        foreach (var c in chosen.Pairs) c.Residual = c.Delta - (ladder.Fit.Axis.Evaluate(c.RepeatX) - ladder.Fit.Axis.Evaluate(c.FirstX));
        var trial = chosen with { Fit = ladder.Fit, Scores = ladder.Scores };
        var (d2, adopt2) = setting.DecidePeriod(trial, runs);
        // the ladder is physics of ideal spherical mirrors; an astigmatic cavity splits its families off the rungs. The extra
        // constraints must agree with the peaks as well as the pairs alone do (reduced χ² at most twice theirs, or 2)
        var pairFit = chosen.Fit!;
        var pairDof = Math.Max(1, chosen.Pairs.Count(c => c.Used) - pairFit.Axis.Degree);
        var agrees = ladder.ReducedChiSquare <= 2 * Math.Max(1, pairFit.ChiSquare / pairDof);
        if (!agrees)
            warnings.Add($"{setting.Sweep.Name}: the transverse families do not lie on one Gouy ladder within the peak positions' uncertainty (reduced χ² {ladder.ReducedChiSquare:G3} against {pairFit.ChiSquare / pairDof:G3} of the repeat pairs alone); the axis rests on the repeat pairs");
        if (agrees && adopt2 is null && Math.Abs(d2.PeriodHz / decision.PeriodHz - 1) < 1e-9 && d2.Families.Count >= decision.Families.Count &&
            d2.Candidates.First(c => c.Chosen).Consistent == decision.Candidates.First(c => c.Chosen).Consistent)
        {
            runs[runs.IndexOf(chosen)] = trial;
            chosen = trial;
            decision = d2;
            return ladder;
        }

        for (var i = 0; i < before.Count; i++) chosen.Pairs[i].Residual = before[i];
        return null;
    }

    /// <summary>The chosen period does not explain every repeat (a mode hop, a dense pattern of similar lines): it is kept
    /// only when it explains clearly more than its half and its double; otherwise the evidence does not decide.</summary>
    private static void CheckThePeriodExplainsThePeaks(Sweep sweep, PeriodDecision decision, List<string> warnings)
    {
        if (decision.Candidates.FirstOrDefault(c => c.Chosen) is not { Consistent: false } mine) return;
        var rival = decision.Candidates.Where(c => c.Label is "half" or "double").MaxBy(c => c.Explained)!;
        if (rival.Explained >= mine.Explained - 0.1)
            throw Undecided(sweep, decision, $"the {rival.Label} period explains the peak pattern about as well as the chosen one");
        if (mine.Explained < MinExplainedToKeep)
            throw Undecided(sweep, decision, $"the best period explains only {mine.Explained:P0} of the repeats its peak groups predict");
        warnings.Add($"{sweep.Name}: the period explains only {mine.Explained:P0} of the repeats its peak groups predict (its {rival.Label} {rival.Explained:P0}): " +
                     "the source may have changed during the sweep, or some peaks are not source lines; a [[calibration]] sweep would settle the scale");
    }

    private static SelfCalibrationResult Result(Setting setting, List<PairingRun> runs, PairingRun chosen, PeriodDecision? decision, Ladder? ladder,
        double initialPeriodSamples, List<string> warnings)
    {
        var (sweep, instrument, period) = (setting.Sweep, setting.Instrument, setting.Period);
        var fit = chosen.Fit!;
        // the chosen run's flags are the ones that count (the companion intervals are shared between runs)
        foreach (var (c, used) in chosen.CompanionState) { c.Used = used.Used; c.Residual = used.Residual; }
        var allPairs = chosen.Pairs.Concat(setting.CompanionPairs).ToList();
        var usedPairs = allPairs.Where(c => c.Used).ToList();
        var residualRms = Math.Sqrt(usedPairs.Sum(c => c.Residual * c.Residual) / Math.Max(1, usedPairs.Count));
        var final = fit.Axis;
        AddAxisWarnings(setting, chosen, ladder, allPairs, residualRms, warnings);
        var finesse = setting.Options.FitFinesse ? FinesseOnTheAxis(setting, final, warnings) : null;
        // calibration points: each pair's repeat with the frequency its partner assigns it
        var calibration = new AxisCalibration(instrument.Name, sweep.Direction, sweep.Name, Method(setting, chosen, ladder), final,
            usedPairs.Select(c => c.RepeatX).ToArray(), usedPairs.Select(c => final.Evaluate(c.FirstX) + c.Delta).ToArray(),
            usedPairs.Select(c => c.Residual).ToArray(), residualRms,
            finesse is { Consistent: true } ? finesse.Finesse : null, finesse is { Consistent: true } ? finesse.Sigma : null, warnings)
        {
            FromRepeats = true,
            PairsUsed = usedPairs.Count,
            PairsRejected = allPairs.Count - usedPairs.Count,
            AxisSigmaHz = fit.AxisSigmaHz,
            ShapeCovariance = fit.ShapeCovariance,
            FinesseDetail = finesse,
            PeriodDecision = decision,
            BuiltAtFsrHz = instrument.FsrHz,
        };
        // the data may say the period is another multiple of the stated FSR (a near-confocal cavity whose TEM00 repeats every
        // c/2L): the axis stays in units of the period it was fitted at and the decision goes with it; the settlement puts
        // it at the FSR it decides, once (AxisCalibration.AtFsr)
        if (decision is not null && Math.Abs(decision.PeriodHz / period - 1) > 1e-9)
            calibration = calibration with { Warnings = calibration.Warnings.Append($"{sweep.Name}: {decision.Basis}").ToList() };

        var reportPairs = allPairs.Select(c => new RepeatPair(c.FirstX, c.RepeatX, c.FirstHeight, c.RepeatHeight, c.Delta, c.Sigma, c.Origin, c.Residual, c.Used)).ToList();
        var candidates = runs.Select(r => new PeriodCandidate(r.PeriodSamples, r.Pairs.Count(c => c.Used), r.Coverage, r.HeightMismatch, ReferenceEquals(r, chosen))).ToList();
        return new SelfCalibrationResult(calibration, reportPairs, setting.Found, chosen.Scores, fit.AxisSigmaHz, chosen.Iterations, initialPeriodSamples, candidates);
    }

    private static void AddAxisWarnings(Setting setting, PairingRun chosen, Ladder? ladder, List<RepeatConstraint> allPairs, double residualRms, List<string> warnings)
    {
        var (sweep, instrument, options, period) = (setting.Sweep, setting.Instrument, setting.Options, setting.Period);
        var fit = chosen.Fit!;
        var final = fit.Axis;
        var usedCount = allPairs.Count(c => c.Used);
        var rejected = allPairs.Count - usedCount;
        var lw = instrument.LinewidthHz * period / instrument.FsrHz;
        if (residualRms > 0.1 * lw)
            warnings.Add($"{sweep.Name}: the self-calibrated axis fits its repeats with a residual RMS of {Quantity.FormatFrequency(residualRms, 3)} ({residualRms / lw:F2} linewidths); " +
                         "line positions may be off by that much (a noisy or drifting sweep, or peaks that do not repeat exactly)");
        if (fit.AxisSigmaHz > 0.1 * lw)
            warnings.Add($"{sweep.Name}: the self-calibrated axis is uncertain by {Quantity.FormatFrequency(fit.AxisSigmaHz, 3)} RMS ({fit.AxisSigmaHz / lw:F2} linewidths) with {usedCount} pairs; sweep over more FSRs or add a calibration sweep");
        if (allPairs.Count > 0 && rejected > 0.2 * allPairs.Count)
            warnings.Add($"{sweep.Name}: {rejected} of {allPairs.Count} repeat pairs were rejected as outliers; the source may not be stable over the sweep");
        if ((ladder?.Points ?? usedCount) < 2 * (final.Degree + 1))
            warnings.Add($"{sweep.Name}: only {usedCount} repeat pairs support a degree-{final.Degree} axis; the non-linearity of the piezo is poorly pinned");
        var atMax = chosen.Scores.FirstOrDefault(d => d.Degree == final.Degree);
        var below = chosen.Scores.FirstOrDefault(d => d.Degree == final.Degree - 1);
        if (options.Degree is null && final.Degree == options.MaxDegree && atMax is not null && below is not null && below.LeaveOneOut > 2 * atMax.LeaveOneOut)
            warnings.Add($"{sweep.Name}: the axis needed degree {final.Degree}, the largest tried; the ramp may be more non-linear than a polynomial describes");
        warnings.AddRange(RepeatRounds.UnrepeatedStretches(sweep, setting.Peaks, chosen.Pairs, final, setting.Delta, setting.XLo, setting.XHi));
    }

    /// <summary>Effective finesse from isolated peaks on the new axis, with a warning when it is far from the stated one.</summary>
    private static FinesseEstimate? FinesseOnTheAxis(Setting setting, AxisPolynomial axis, List<string> warnings)
    {
        var (sweep, instrument) = (setting.Sweep, setting.Instrument);
        var finesse = FinesseFit.FromSweep(sweep, axis, setting.Period, instrument.Finesse, setting.Found);
        if (finesse is null) return null;
        warnings.AddRange(finesse.Warnings.Select(w => $"{sweep.Name}: {w}"));
        var ratio = finesse.Finesse / instrument.Finesse;
        if (ratio > 3 || ratio < 1.0 / 3)
            warnings.Add($"{sweep.Name}: on the self-calibrated axis the peaks have finesse {finesse.Finesse:F0}, far from the stated {instrument.Finesse:F0}: " +
                         "either the stated finesse is wrong or the repeats were matched at a wrong period (a source whose pattern nearly repeats within one FSR); check with a calibration sweep");
        return finesse;
    }

    private static string Method(Setting setting, PairingRun chosen, Ladder? ladder)
    {
        var usedRepeats = chosen.Pairs.Count(c => c.Used);
        var companion = setting.Options.Companion;
        return ladder is not null
            ? $"self-calibration from repeats one FSR apart ({usedRepeats} pairs) and the transverse families on their Gouy ladder ({ladder.Note})"
            : companion is null
            ? $"self-calibration from repeats one FSR apart ({usedRepeats} pairs)"
            : $"self-calibration from repeats one FSR apart ({usedRepeats} pairs) jointly with the {companion.Method} ({setting.CompanionPairs.Count(c => c.Used)} intervals)";
    }

    internal static InputException Undecided(Sweep sweep, PeriodDecision d, string why) =>
        new($"{sweep.Name}: the period of the sweep is not decided ({why}). Candidates: " +
            string.Join("; ", d.Candidates.Select(c => $"{c.Label} {c.PeriodScan:G4} scan units (explains {c.Explained:P0} of {c.Predictions} predicted repeats, alternate heights agree {c.HeightAgreement:F2})")) +
            ". What would settle it: a [[calibration]] sweep with a single-frequency laser, a stated interval between two lines (known_interval in [solve]), " +
            "the mirror radii of the cavity (mirror_radius), or the other ramp direction", sweep.Source);

    internal static InputException NoRepeats(Sweep sweep, Instrument instrument, double period, int peakCount)
    {
        var found = peakCount >= 0 ? $"{peakCount} peaks were found but " : "";
        return new InputException(
            $"{sweep.Name}: no repeats found: {found}no feature of the sweep recurs one period later at any spacing from a few peak widths up to the whole record " +
            $"(the period sought is the FSR, {Quantity.FormatFrequency(period)}). Self-calibration needs a stable source and a sweep over more than one FSR; " +
            "add a [[calibration]] sweep for this instrument, or check the signal column", sweep.Source);
    }

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
}
