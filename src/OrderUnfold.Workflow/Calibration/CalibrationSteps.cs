using OrderUnfold.Instruments;
using OrderUnfold.Units;

namespace OrderUnfold.Calibration;

/// <summary>
/// The calibration steps the pipeline runs besides the calibration-sweep axes: checks of calibration sweeps
/// (Airy fit of the finesse, transverse modes), self-calibration of source sweeps that lack a calibration,
/// and what the calibrations measured about each cavity (period, transverse families, whether the finesse was measured).
/// </summary>
public static class CalibrationSteps
{
    /// <summary>
    /// Fits the finesse of a calibration sweep's peaks (Airy fit, with uncertainty) and looks for transverse-mode
    /// families; the fitted finesse replaces the width-based one when the peaks agree with each other. The Airy fit runs
    /// once on the axis finally chosen (the check of two readings of the peaks below fits both and keeps the chosen one's).
    /// </summary>
    /// <param name="axis">The axis <see cref="AxisCalibrator.FromCalibrationSweep"/> made of <paramref name="sweep"/>.</param>
    /// <param name="sweep">The calibration sweep segment.</param>
    /// <param name="instrument">The cavity.</param>
    /// <param name="wavelengthRatio">λ_calibration / λ_source.</param>
    /// <param name="cancellationToken">Stops the self-calibrations of the checks (<see cref="OperationCanceledException"/>).</param>
    public static AxisCalibration DescribeCalibrationSweep(AxisCalibration axis, Sweep sweep, Instrument instrument, double wavelengthRatio = 1.0,
        CancellationToken cancellationToken = default)
    {
        var period = instrument.FsrHz * wavelengthRatio;
        var warnings = axis.Warnings.ToList();
        var transverse = TransverseModes.Detect(sweep, axis.Axis, instrument, period, axis.Finesse);

        // Numbering every peak as the next FSR fails when a transverse family adds peaks: with a strong half-FSR
        // family the peaks alternate in height and the axis comes out at twice its scale without any irregular spacing.
        // Then fit the axis to repeats one FSR apart, which pairs only peaks of the same family.
        var suspicious = transverse.AlternationRatio is < 0.75 || axis.Warnings.Any(w => w.Contains("typical spacings apart", StringComparison.Ordinal));
        var finesse = (FinesseEstimate?)null;
        var fitted = false;
        if (suspicious && axis.PointCount >= 3) (axis, finesse, fitted) = CheckTwoReadings(axis, sweep, instrument, period, warnings, cancellationToken);
        axis = WithPeriodEvidence(axis, sweep, instrument, period, cancellationToken);

        if (!fitted) finesse = FinesseFit.FromSweep(sweep, axis.Axis, period, instrument.Finesse);
        if (finesse is not null) warnings.AddRange(finesse.Warnings.Select(w => $"{sweep.Name}: {w}"));
        var measured = finesse is { Consistent: true } ? finesse.Finesse : axis.Finesse;
        transverse = TransverseModes.Detect(sweep, axis.Axis, instrument, period, measured);
        warnings.AddRange(transverse.Warnings);
        return axis with
        {
            Finesse = measured,
            FinesseSigma = finesse is { Consistent: true } ? finesse.Sigma : axis.FinesseSigma,
            FinesseDetail = finesse,
            TransverseModes = transverse,
            Warnings = warnings.Distinct().ToList(),
        };
    }

    /// <summary>
    /// Peaks that alternate in height may be two transverse families: the axis fitted to repeats one FSR apart is compared
    /// with the numbered one, and where their scales differ by more than 5 % the finesse on each decides (the wrong reading
    /// scales the peak widths by the same factor). Returns the axis kept and, when both readings were fitted, the Airy fit
    /// on the kept one (<c>Fitted</c> true; the caller does not fit it again).
    /// </summary>
    private static (AxisCalibration Axis, FinesseEstimate? Finesse, bool Fitted) CheckTwoReadings(AxisCalibration axis, Sweep sweep, Instrument instrument,
        double period, List<string> warnings, CancellationToken cancellationToken)
    {
        try
        {
            var reading = SelfCalibrator.Calibrate(sweep, instrument, new SelfCalibrationOptions { PeriodHz = period, FitFinesse = false }, cancellationToken).Calibration;
            // the repeats reading is compared (and kept) in Hz at the FSR its own peak pattern implies; its period decision is
            // not carried into the kept axis, which counts as built at the stated FSR like the numbered reading
            var repeats = reading.DecidedFsrHz is double own ? reading.AtFsr(own, instrument.FsrHz) with { BuiltAtFsrHz = instrument.FsrHz } : reading;
            var mid = 0.5 * (repeats.Axis.XMin + repeats.Axis.XMax);
            var scale = repeats.Axis.Derivative(mid) / axis.Axis.Derivative(mid);
            var useRepeats = repeats.ResidualRmsHz < 0.5 * axis.ResidualRmsHz;
            (FinesseEstimate? Numbered, FinesseEstimate? Repeats)? fits = null;
            if (Math.Abs(scale - 1) > 0.05)
            {
                // two readings of the same peaks: every peak is one FSR (a confocal cavity showing both transverse
                // families, FSR = c/4L), or every second one is (an extra family)
                fits = (FinesseFit.FromSweep(sweep, axis.Axis, period, instrument.Finesse), FinesseFit.FromSweep(sweep, repeats.Axis, period, instrument.Finesse));
                var (fNumbered, fRepeats) = (fits.Value.Numbered?.Finesse, fits.Value.Repeats?.Finesse);
                double Off(double? f) => f is double v && v > 0 ? Math.Abs(Math.Log(v / instrument.Finesse)) : double.PositiveInfinity;
                useRepeats = Off(fRepeats) < Off(fNumbered);
                warnings.Add(useRepeats
                    ? $"{sweep.Name}: not every calibration peak is the next FSR (extra peaks of another transverse family): fitted to repeats one FSR apart instead, which changes the axis scale by {100 * (scale - 1):+0.0;-0.0} % and gives finesse {fRepeats:F0} against the stated {instrument.Finesse:F0} (numbering every peak gives {fNumbered:F0})"
                    : $"{sweep.Name}: the calibration peaks alternate in height; every peak was taken as the next FSR because that gives finesse {fNumbered:F0}, close to the stated {instrument.Finesse:F0} (taking every second peak would give {fRepeats:F0})");
            }

            var kept = fits is { } f2 ? (useRepeats ? f2.Repeats : f2.Numbered) : null;
            if (!useRepeats) return (axis, kept, fits is not null);
            warnings.AddRange(repeats.Warnings);
            return (axis with
            {
                Method = "calibration sweep (repeats one FSR apart; extra peaks left out)",
                Axis = repeats.Axis,
                PointX = repeats.PointX,
                PointHz = repeats.PointHz,
                ResidualHz = repeats.ResidualHz,
                ResidualRmsHz = repeats.ResidualRmsHz,
                PairsUsed = repeats.PairsUsed,
                PairsRejected = repeats.PairsRejected,
                AxisSigmaHz = repeats.AxisSigmaHz,
                ShapeCovariance = repeats.ShapeCovariance,
                Finesse = null,
                FinesseSigma = null,
            }, kept, fits is not null);
        }
        catch (InputException e)
        {
            warnings.Add($"{sweep.Name}: the calibration peaks look like two transverse families, but fitting repeats one FSR apart failed too: {e.Message}");
            return (axis, null, false);
        }
    }

    /// <summary>The period decision on the calibration sweep's own peak pattern (candidates, families) as evidence; kept when
    /// it agrees with the numbered axis (same period in Hz, scale within 5 %).</summary>
    private static AxisCalibration WithPeriodEvidence(AxisCalibration axis, Sweep sweep, Instrument instrument, double period, CancellationToken cancellationToken)
    {
        if (axis.PeriodDecision is not null || axis.PointCount < 2) return axis;
        try
        {
            var check = SelfCalibrator.Calibrate(PrepareForPeakFinding(sweep, instrument), instrument,
                new SelfCalibrationOptions { PeriodHz = period, FitFinesse = false }, cancellationToken).Calibration;
            var mid = 0.5 * (axis.Axis.XMin + axis.Axis.XMax);
            var scale = check.Axis.Derivative(mid) / axis.Axis.Derivative(mid);
            // with few peaks the pattern can settle on a multiple of the spacing; the numbered axis (and the
            // alternation check above) then stands, without this evidence
            if (check.PeriodDecision is { } d && Math.Abs(d.PeriodHz / period - 1) < 1e-9 && Math.Abs(scale - 1) < 0.05)
                return axis with { PeriodDecision = d };
        }
        catch (InputException)
        {
            // the pattern alone does not decide here (too few peaks): the numbered axis stands on its own
        }

        return axis;
    }

    /// <summary>Axes a calibration step made (for self-calibrated ones, Source = the segment's name) and the warnings they gave.</summary>
    public sealed record CalibrationAxes(IReadOnlyList<AxisCalibration> Axes, IReadOnlyList<string> Warnings);

    /// <summary>
    /// Self-calibrates the source sweep segments that need it under the setup's <see cref="SolveOptions.SelfCalibrate"/>
    /// mode and returns their axes (Source = the segment's name) with their warnings.
    /// </summary>
    /// <param name="setup">The setup.</param>
    /// <param name="instruments">Instruments by name, as stated: their FSR is the period the repeats are fitted at (the axes
    /// stay in units of it) and their finesse only a starting value (the lag hint and the Airy fit's start); both are
    /// settled afterwards from what the peaks measured (Pipeline/InstrumentSettlement.cs).</param>
    /// <param name="calibrations">Axes from calibration sweeps so far (companions and fallbacks of the source sweeps).</param>
    /// <param name="progress">Progress messages.</param>
    /// <param name="readSegments">Reads a file's segments the way the pipeline does (time relative to each segment's start).</param>
    /// <param name="cancellationToken">Stops the self-calibrations (<see cref="OperationCanceledException"/>).</param>
    /// <exception cref="InputException">A segment cannot be self-calibrated and has no other calibration to fall back on.</exception>
    public static CalibrationAxes FromSources(Setup setup, IReadOnlyDictionary<string, Instrument> instruments, IReadOnlyList<AxisCalibration> calibrations,
        IProgress<string>? progress, Func<SweepFileOptions, IReadOnlyList<Sweep>> readSegments, CancellationToken cancellationToken = default)
    {
        var axes = new List<AxisCalibration>();
        var warnings = new List<string>();
        if (setup.Solve.SelfCalibrate == SelfCalibrationMode.Never) return new CalibrationAxes(axes, warnings);
        var fromSweeps = calibrations.Where(c => !c.FromRepeats).ToList();
        foreach (var spec in setup.Sweeps)
        {
            if (!instruments.TryGetValue(spec.Instrument, out var inst)) continue; // the pipeline reports the unknown name
            var file = FromSourceFile(spec, inst, fromSweeps.Where(c => c.Instrument == spec.Instrument).ToList(), setup.Solve.SelfCalibrate, progress, readSegments, cancellationToken);
            axes.AddRange(file.Axes);
            warnings.AddRange(file.Warnings);
        }

        return new CalibrationAxes(axes, warnings);
    }

    /// <summary>The self-calibrated axes of one source file's segments; a segment that fails uses a calibration sweep's axis
    /// or that of another segment of the same ramp direction, with a warning naming why.</summary>
    private static CalibrationAxes FromSourceFile(SweepSpec spec, Instrument inst, List<AxisCalibration> mine, SelfCalibrationMode mode,
        IProgress<string>? progress, Func<SweepFileOptions, IReadOnlyList<Sweep>> readSegments, CancellationToken cancellationToken)
    {
        var warnings = new List<string>();
        var failed = new List<(Sweep Segment, InputException Error)>();
        var done = new List<AxisCalibration>();
        // ring-down: fast-swept peaks that ring are fitted with the swept-cavity model and the peak finding below sees
        // each one as its static response at the resonance crossing; other sweeps pass unchanged (RingdownHandling.cs)
        foreach (var ring in RingdownHandling.PrepareAll(readSegments(spec.File)))
        {
            var seg = ring.Sweep;
            var exact = mine.FirstOrDefault(c => c.Direction == seg.Direction);
            AxisCalibration? companion = null;
            if (exact is not null)
            {
                // a calibration sweep with enough peaks that fits them well stands alone; one with few peaks, or whose
                // polynomial cannot follow the piezo between them (residual above a twentieth of a linewidth), is
                // fitted jointly with the source's own repeats
                var wellPinned = exact.PointCount >= 4 && exact.ResidualRmsHz <= JointResidualLinewidths * inst.LinewidthHz;
                if (mode == SelfCalibrationMode.Auto && (wellPinned || exact.PointCount == 0)) continue;
                companion = exact.PointCount >= 2 ? exact : null;
            }

            progress?.Report($"self-calibrating {seg.Name} from its repeats one FSR apart");
            // the place where a sweep's signal goes into peak finding: a signal filter (e.g. for ring-down) applies here
            var prepared = PrepareForPeakFinding(seg, inst);
            try
            {
                var result = SelfCalibrator.Calibrate(prepared, inst, new SelfCalibrationOptions { Companion = companion }, cancellationToken);
                // finesse from the decay time when the peaks ring, with the FSR the period decision settled on (a cavity stated
                // as confocal that is not has twice the stated FSR, and F = π·FSR·τ)
                var fsrHz = result.Calibration.PeriodDecision?.PeriodHz ?? inst.FsrHz;
                var calibration = RingdownHandling.Annotate(result.Calibration, ring, fsrHz);
                done.Add(calibration);
                warnings.AddRange(calibration.Warnings);
            }
            catch (InputException e)
            {
                var fallback = exact ?? mine.FirstOrDefault(c => c.Direction == RampDirection.Single || seg.Direction == RampDirection.Single);
                if (fallback is null) failed.Add((seg, e));
                else warnings.Add($"{seg.Name}: self-calibration failed, using the {fallback.Method} instead: {e.Message}");
            }
        }

        warnings.AddRange(failed.Select(f => SiblingFallback(spec, f.Segment, f.Error, failed, done)));
        return new CalibrationAxes(done, warnings);
    }

    /// <summary>A segment that cannot be self-calibrated (often a partial ramp at the start or end of the record) uses the
    /// axis of another segment of the same ramp direction in the same file: the warning that says so, or the refusal when
    /// there is none.</summary>
    private static string SiblingFallback(SweepSpec spec, Sweep seg, InputException e, List<(Sweep Segment, InputException Error)> failed, List<AxisCalibration> done)
    {
        var sibling = done.FirstOrDefault(c => c.Direction == seg.Direction);
        if (sibling is null)
        {
            var others = failed.Where(f => f.Segment.Direction == seg.Direction && !ReferenceEquals(f.Segment, seg)).Select(f => f.Error.Message).ToList();
            var also = others.Count == 0 ? "" : $"; the other {others.Count} segment(s) of that direction failed too: {string.Join(" | ", others)}";
            throw new InputException($"{e.Message} (no [[calibration]] sweep for instrument '{spec.Instrument}' and no other {seg.Direction.ToString().ToLowerInvariant()}-ramp segment of this file to fall back on{also})", e.File ?? spec.File.Path, e.Line, e.Column, e);
        }

        return $"{seg.Name}: self-calibration failed, using the axis of {sibling.Source} (same ramp direction) instead: {e.Message}";
    }

    /// <summary>Calibration-sweep residual RMS (in linewidths) above which, with self_calibrate = "auto", the source's
    /// repeats are fitted jointly with the calibration peaks.</summary>
    public const double JointResidualLinewidths = 0.05;

    /// <summary>
    /// The one place where a sweep's signal is prepared before peak finding in the calibration flow, after the ring-down
    /// preparation (Calibration/RingdownHandling.cs) that the callers apply to a file's segments together.
    /// </summary>
    public static Sweep PrepareForPeakFinding(Sweep sweep, Instrument instrument) => sweep;

    /// <summary>Instruments and axes with what the calibrations measured about each cavity, and the warnings that say so.</summary>
    public sealed record CavitySettlement(IReadOnlyDictionary<string, Instrument> Instruments, IReadOnlyList<AxisCalibration> Calibrations, IReadOnlyList<string> Warnings)
    {
        /// <summary>The same axes as calibration built them (at the stated FSR, with the period decisions as settled), in the
        /// same order: a later decision of the FSR converts these, not <see cref="Calibrations"/>.</summary>
        public IReadOnlyList<AxisCalibration> Built { get; init; } = [];
    }

    /// <summary>
    /// Carries what the calibrations measured about each cavity into its instrument: the period decided from the peak
    /// pattern (the FSR, when the data show it is another multiple of the stated one), the transverse families (median
    /// over the axes that found them; part of the instrument response from here on), and whether the finesse was
    /// measured. Where it was not, warns, says which value is used and flags the instrument so the refinement can widen
    /// its uncertainties. Every axis, built at the stated FSR, is converted to the decided FSR here, once
    /// (<see cref="AxisCalibration.AtFsr"/>); <see cref="CavitySettlement.Built"/> keeps them as built.
    /// </summary>
    /// <exception cref="InputException">The axes of one instrument disagree on the period.</exception>
    public static CavitySettlement SettleCavityProperties(IReadOnlyDictionary<string, Instrument> instruments, IReadOnlyList<AxisCalibration> calibrations,
        Func<string, bool>? finesseFixed = null)
    {
        var settled = instruments.ToDictionary(p => p.Key, p => p.Value);
        var built = calibrations.ToList();
        var axes = calibrations.ToList();
        var warnings = new List<string>();
        foreach (var name in settled.Keys.ToList())
        {
            var inst = settled[name];
            var period = SettlePeriod(name, inst, built, warnings);
            // every axis of the instrument was built at the stated FSR: it is converted to the settled FSR here, once
            for (var i = 0; i < axes.Count; i++)
                if (built[i].Instrument == name) axes[i] = built[i].AtFsr(period ?? inst.FsrHz, inst.FsrHz);
            if (period is double fsr) inst = inst with { FsrHz = fsr };
            var mine = axes.Where(c => c.Instrument == name).ToList();
            var decided = mine.Where(c => c.PeriodDecision is not null).Select(c => c.PeriodDecision!).ToList();
            // families: the median offset and height per family index over the axes that found them
            var families = decided.SelectMany(d => d.Families).GroupBy(f => f.N).OrderBy(g => g.Key)
                .Select(g =>
                {
                    var off = Medians.Upper(g.Select(f => f.GouyOffsetFsr));
                    var h = Medians.Upper(g.Select(f => f.RelativeHeight));
                    return new CavityModeFamily(g.Key, off, h, g.First().Basis);
                }).ToList();
            if (families.Count > 0)
                warnings.Add($"instrument '{name}': transverse families of the cavity are part of its response (not source lines): " +
                             string.Join(", ", families.Select(f => $"N={f.N} at {f.ApparentOffsetFsr:F4} FSR after TEM00, {100 * f.RelativeHeight:F0} % of its height")) +
                             MirrorRadiusNote(inst, families));

            var measured = mine.Any(c => c.Finesse is not null);
            if (!measured && !(finesseFixed?.Invoke(name) ?? false))
                warnings.Add($"instrument '{name}': the finesse could not be measured from the peaks (no isolated peak fitted the Airy profile consistently; see the warnings of its sweeps); the stated value {inst.Finesse:F0} is used and the line uncertainties are widened");
            settled[name] = inst with { Families = families, FinesseMeasured = measured };
        }

        return new CavitySettlement(settled, axes, warnings) { Built = built };
    }

    /// <summary>
    /// The period (FSR in Hz) of one instrument that its axes decided from their peak patterns, or null when it stays as
    /// stated. Each decision is read as the FSR it implies for the source (<see cref="AxisCalibration.DecidedFsrHz"/>: a
    /// calibration laser at another wavelength repeats every FSR·λ_cal/λ_source, which is still one FSR). The sweeps whose
    /// period explains every peak decide (c/4L or c/2L for a stated confocal cavity); a sweep whose pattern was explained
    /// only in part (noise, ring-down) follows them (its decision says so). No axis is converted here: the caller puts every
    /// axis of the instrument at the period returned, once. Works on this stage's own copy of the axes, <paramref name="axes"/>.
    /// </summary>
    private static double? SettlePeriod(string name, Instrument inst, List<AxisCalibration> axes, List<string> warnings)
    {
        static double Implied(AxisCalibration c) => c.DecidedFsrHz ?? c.PeriodDecision!.PeriodHz;
        var decided = axes.Where(c => c.Instrument == name && c.PeriodDecision is not null).ToList();
        var sure = decided.Where(c => c.PeriodDecision!.Candidates.Any(k => k.Chosen && k.Consistent)).ToList();
        var surePeriods = sure.Select(Implied).Distinct().ToList();
        if (surePeriods.Count == 1)
        {
            for (var i = 0; i < axes.Count; i++)
            {
                var c = axes[i];
                if (c.Instrument != name || c.PeriodDecision is not { } d || sure.Contains(c) || Implied(c) == surePeriods[0]) continue;
                warnings.Add($"{c.Source}: its peak pattern did not decide the FSR; it follows the sweeps that did ({Quantity.FormatFrequency(surePeriods[0])})");
                axes[i] = c with
                {
                    PeriodDecision = d with { PeriodHz = d.StatedFsrHz == c.BuiltAtFsrHz ? surePeriods[0] : d.PeriodHz * surePeriods[0] / Implied(c), Basis = d.Basis + $"; the FSR follows the sweeps that decided it ({Quantity.FormatFrequency(surePeriods[0])})" },
                };
            }

            decided = axes.Where(c => c.Instrument == name && c.PeriodDecision is not null).ToList();
        }

        var periods = decided.Select(Implied).Distinct().ToList();
        if (periods.Count > 1)
            throw new InputException($"instrument '{name}': the sweeps disagree on the period: {string.Join(" vs ", decided.Select(c => $"{Quantity.FormatFrequency(Implied(c))} ({c.PeriodDecision!.Basis})"))}; " +
                                     "a [[calibration]] sweep, the mirror radii (mirror_radius) or a stated interval would settle it");
        if (periods.Count != 1 || !(Math.Abs(periods[0] / inst.FsrHz - 1) > 1e-9)) return null;
        warnings.Add($"instrument '{name}': the data decide an FSR of {Quantity.FormatFrequency(periods[0])} instead of the stated {Quantity.FormatFrequency(inst.FsrHz)} ({decided[0].PeriodDecision!.Basis})");
        return periods[0];
    }

    /// <summary>What the measured N = 1 offset says about the mirrors, for two equal mirrors at the stated length (Gouy phase
    /// inverted: g = cos(π·o₁), R = L/(1 − g)), beside the stated radius when there is one; empty without N = 1 or a length.</summary>
    internal static string MirrorRadiusNote(Instrument inst, IReadOnlyList<CavityModeFamily> families)
    {
        var one = families.FirstOrDefault(f => f.N == 1);
        if (one is null || inst.LengthM is not double length) return "";
        var r = GouyPhase.EqualMirrorRadius(one.GouyOffsetFsr, length);
        if (!double.IsFinite(r)) return "";
        var stated = inst.MirrorRadiiM is { } radii ? $" (stated {Quantity.FormatLength(radii.R1)}{(radii.R2 != radii.R1 ? $" and {Quantity.FormatLength(radii.R2)}" : "")})" : "";
        return $"; with the stated length {Quantity.FormatLength(length)}, the N=1 offset means mirrors of R = {Quantity.FormatLength(r)} if both are equal{stated}";
    }
}
