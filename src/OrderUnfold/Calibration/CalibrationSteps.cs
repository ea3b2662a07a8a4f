using OrderUnfold.Instruments;
using OrderUnfold.Io;

namespace OrderUnfold.Calibration;

/// <summary>
/// The calibration steps the pipeline runs besides the calibration-sweep axes: checks of calibration sweeps
/// (Airy fit of the finesse, transverse modes), self-calibration of source sweeps that lack a calibration,
/// and carrying refined FSRs into the instruments and axes.
/// </summary>
public static class CalibrationSteps
{
    /// <summary>
    /// Fits the finesse of a calibration sweep's peaks (Airy fit, with uncertainty) and looks for transverse-mode
    /// families; the fitted finesse replaces the width-based one when the peaks agree with each other.
    /// </summary>
    /// <param name="axis">The axis <see cref="AxisCalibrator.FromCalibrationSweep"/> made of <paramref name="sweep"/>.</param>
    /// <param name="sweep">The calibration sweep segment.</param>
    /// <param name="instrument">The cavity.</param>
    /// <param name="wavelengthRatio">λ_calibration / λ_source.</param>
    public static AxisCalibration DescribeCalibrationSweep(AxisCalibration axis, Sweep sweep, Instrument instrument, double wavelengthRatio = 1.0)
    {
        var period = instrument.FsrHz * wavelengthRatio;
        var warnings = axis.Warnings.ToList();
        var transverse = TransverseModes.Detect(sweep, axis.Axis, instrument, period, axis.Finesse);

        // Numbering every peak as the next FSR fails when a transverse family adds peaks: with a strong half-FSR
        // family the peaks alternate in height and the axis comes out at twice its scale without any irregular spacing.
        // Then fit the axis to repeats one FSR apart, which pairs only peaks of the same family.
        var suspicious = transverse.AlternationRatio is < 0.75 || axis.Warnings.Any(w => w.Contains("typical spacings apart", StringComparison.Ordinal));
        if (suspicious && axis.PointCount >= 3)
        {
            try
            {
                var repeats = SelfCalibrator.Calibrate(sweep, instrument, new SelfCalibrationOptions { PeriodHz = period, FitFinesse = false }).Calibration;
                var mid = 0.5 * (repeats.Axis.XMin + repeats.Axis.XMax);
                var scale = repeats.Axis.Derivative(mid) / axis.Axis.Derivative(mid);
                var useRepeats = repeats.ResidualRmsHz < 0.5 * axis.ResidualRmsHz;
                if (Math.Abs(scale - 1) > 0.05)
                {
                    // two readings of the same peaks: every peak is one FSR (a confocal cavity showing both transverse
                    // families, FSR = c/4L), or every second one is (an extra family). The finesse on each axis decides:
                    // the wrong one scales the peak widths by the same factor.
                    var fNumbered = FinesseFit.FromSweep(sweep, axis.Axis, period, instrument.Finesse)?.Finesse;
                    var fRepeats = FinesseFit.FromSweep(sweep, repeats.Axis, period, instrument.Finesse)?.Finesse;
                    double Off(double? f) => f is double v && v > 0 ? Math.Abs(Math.Log(v / instrument.Finesse)) : double.PositiveInfinity;
                    useRepeats = Off(fRepeats) < Off(fNumbered);
                    warnings.Add(useRepeats
                        ? $"{sweep.Name}: not every calibration peak is the next FSR (extra peaks of another transverse family): fitted to repeats one FSR apart instead, which changes the axis scale by {100 * (scale - 1):+0.0;-0.0} % and gives finesse {fRepeats:F0} against the stated {instrument.Finesse:F0} (numbering every peak gives {fNumbered:F0})"
                        : $"{sweep.Name}: the calibration peaks alternate in height; every peak was taken as the next FSR because that gives finesse {fNumbered:F0}, close to the stated {instrument.Finesse:F0} (taking every second peak would give {fRepeats:F0})");
                }

                if (useRepeats)
                {
                    warnings.AddRange(repeats.Warnings);
                    axis = axis with
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
                    };
                }
            }
            catch (InputException e)
            {
                warnings.Add($"{sweep.Name}: the calibration peaks look like two transverse families, but fitting repeats one FSR apart failed too: {e.Message}");
            }
        }

        var finesse = FinesseFit.FromSweep(sweep, axis.Axis, period, instrument.Finesse);
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
    /// Self-calibrates the source sweep segments that need it under the setup's <see cref="SolveOptions.SelfCalibrate"/>
    /// mode and adds their axes (Source = the segment's name) to <paramref name="calibrations"/>, their warnings to
    /// <paramref name="warnings"/>.
    /// </summary>
    /// <param name="setup">The setup.</param>
    /// <param name="instruments">Instruments by name (as stated or calibrated so far).</param>
    /// <param name="calibrations">Axes from calibration sweeps so far; self-calibrated axes are appended.</param>
    /// <param name="warnings">Warnings of the run.</param>
    /// <param name="progress">Progress messages.</param>
    /// <param name="readSegments">Reads a file's segments the way the pipeline does (time relative to each segment's start).</param>
    /// <exception cref="InputException">A segment cannot be self-calibrated and has no other calibration to fall back on.</exception>
    public static void AddFromSources(Setup setup, IReadOnlyDictionary<string, Instrument> instruments, List<AxisCalibration> calibrations, List<string> warnings,
        IProgress<string>? progress, Func<SweepFileOptions, IReadOnlyList<Sweep>> readSegments)
    {
        var mode = setup.Solve.SelfCalibrate;
        if (mode == SelfCalibrationMode.Never) return;
        var fromSweeps = calibrations.Where(c => !c.FromRepeats).ToList();
        foreach (var spec in setup.Sweeps)
        {
            if (!instruments.TryGetValue(spec.Instrument, out var inst)) continue; // the pipeline reports the unknown name
            var mine = fromSweeps.Where(c => c.Instrument == spec.Instrument).ToList();
            // ring-down (issue 14): fast-swept peaks that ring are fitted with the swept-cavity model and the peak finding
            // below sees each one as its static response at the resonance crossing; other sweeps pass unchanged
            var ringdown = RingdownHandling.PrepareAll(readSegments(spec.File));
            foreach (var prepared in ringdown)
            {
                var seg = prepared.Sweep;
                var exact = mine.FirstOrDefault(c => c.Direction == seg.Direction);
                AxisCalibration? companion = null;
                if (exact is not null)
                {
                    if (mode == SelfCalibrationMode.Auto && (exact.PointCount >= 4 || exact.PointCount == 0)) continue;
                    companion = exact.PointCount >= 2 ? exact : null;
                }

                progress?.Report($"self-calibrating {seg.Name} from its repeats one FSR apart");
                try
                {
                    var result = SelfCalibrator.Calibrate(seg, inst, new SelfCalibrationOptions { Companion = companion });
                    var calibration = RingdownHandling.Annotate(result.Calibration, prepared, inst.FsrHz); // finesse from the decay time when the peaks ring
                    calibrations.Add(calibration);
                    warnings.AddRange(calibration.Warnings);
                }
                catch (InputException e)
                {
                    var fallback = exact ?? mine.FirstOrDefault(c => c.Direction == RampDirection.Single || seg.Direction == RampDirection.Single);
                    if (fallback is null)
                        throw new InputException($"{e.Message} (no [[calibration]] sweep for instrument '{spec.Instrument}' to fall back on)", e.File ?? spec.File.Path, e.Line, e.Column, e);
                    warnings.Add($"{seg.Name}: self-calibration failed, using the {fallback.Method} instead: {e.Message}");
                }
            }
        }
    }

    /// <summary>Carries refined FSRs into the instruments and scales the axes of those instruments with them.</summary>
    public static void ApplyFsrRefinement(FsrRefinement refinement, IDictionary<string, Instrument> instruments, List<AxisCalibration> calibrations)
    {
        foreach (var s in refinement.Instruments)
        {
            if (!instruments.TryGetValue(s.Instrument, out var inst) || s.RelativeChange == 0) continue;
            var factor = s.RefinedFsrHz / inst.FsrHz;
            instruments[s.Instrument] = inst with { FsrHz = s.RefinedFsrHz };
            for (var i = 0; i < calibrations.Count; i++)
            {
                var c = calibrations[i];
                if (c.Instrument != s.Instrument) continue;
                calibrations[i] = c with
                {
                    Axis = c.Axis.Scaled(factor),
                    PointHz = c.PointHz.Select(v => v * factor).ToArray(),
                    ResidualHz = c.ResidualHz.Select(v => v * factor).ToArray(),
                    ResidualRmsHz = c.ResidualRmsHz * factor,
                    AxisSigmaHz = c.AxisSigmaHz * factor,
                    ShapeCovariance = c.ShapeCovariance?.Select(v => v * factor * factor).ToArray(),
                    Method = c.Method + $"; FSR refined by {100 * (factor - 1):+0.000;-0.000} % ({s.Basis})",
                };
            }
        }
    }
}
