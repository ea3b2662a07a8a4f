using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using OrderUnfold.Units;

namespace OrderUnfold.Pipeline;

/// <summary>What the calibration stage produced: the settled instruments and axes, and the calibration files it read.</summary>
/// <param name="Settled">Instruments and axes as settled (<see cref="InstrumentSettlement"/>).</param>
/// <param name="Warnings">Warnings of the calibration sweeps, the self-calibration and the settlement, in that order.</param>
/// <param name="Inputs">The calibration files read.</param>
internal sealed record CalibrationOutcome(SettledInstruments Settled, IReadOnlyList<string> Warnings, IReadOnlyList<InputFile> Inputs);

/// <summary>
/// The calibration stage of an unfold: axes per (instrument, ramp direction) from the calibration sweeps (or a saved
/// calibration), axes self-calibrated from source sweeps that need them (<see cref="CalibrationSteps.FromSources"/>), then
/// the instruments settled from that evidence (<see cref="InstrumentSettlement"/>).
/// </summary>
internal static class CalibrationStage
{
    public static CalibrationOutcome Run(Setup setup, IProgress<string>? progress, CalibrationSet? reuse, CancellationToken cancellationToken)
    {
        var instruments = setup.Instruments.ToDictionary(i => i.Name, i => i.ToInstrument());
        var calibrations = new List<AxisCalibration>();
        var warnings = new List<string>();
        var inputs = new List<InputFile>();
        if (reuse is not null)
        {
            CalibrationFile.CheckAgainst(reuse, setup.Instruments, reuse.Source);
            calibrations.AddRange(reuse.Axes);
            foreach (var inst in reuse.Instruments.Where(i => instruments.ContainsKey(i.Name))) instruments[inst.Name] = inst;
        }
        else
        {
            foreach (var cal in setup.Calibrations)
            {
                progress?.Report($"calibrating {cal.Instrument} from {Path.GetFileName(cal.File.Path)}");
                inputs.Add(UnfoldPipeline.Describe("calibration", cal.File.Path));
                var file = FromCalibrationFile(cal, UnfoldPipeline.Lookup(instruments, cal.Instrument, cal.File.Path), WavelengthRatio(cal, setup), cancellationToken);
                calibrations.AddRange(file.Axes);
                warnings.AddRange(file.Warnings);
            }

            var sources = CalibrationSteps.FromSources(setup, instruments, calibrations, progress,
                file => UnfoldPipeline.ReadSegments(file, cancellationToken), cancellationToken);
            calibrations.AddRange(sources.Axes);
            warnings.AddRange(sources.Warnings);
        }

        var settled = InstrumentSettlement.Settle(setup, instruments, calibrations, reuse is not null);
        return new CalibrationOutcome(settled, [.. warnings, .. settled.Warnings], inputs);
    }

    /// <summary>The axes of one calibration file, one per ramp direction (the segment with the most calibration points);
    /// a segment that fails is skipped with a warning when the file has others.</summary>
    private static CalibrationSteps.CalibrationAxes FromCalibrationFile(CalibrationSpec cal, Instrument inst, double ratio, CancellationToken cancellationToken)
    {
        // calibration sweeps ring too when swept fast: the same preparation as the source sweeps
        var segments = RingdownHandling.PrepareAll(UnfoldPipeline.ReadSegments(cal.File, cancellationToken)).Select(p => p.Sweep).ToList();
        var byDirection = new Dictionary<RampDirection, AxisCalibration>();
        var warnings = new List<string>();
        var reasons = new List<string>();
        foreach (var seg in segments)
        {
            AxisCalibration axis;
            try
            {
                axis = AxisCalibrator.FromCalibrationSweep(seg, inst, cal.AxisDegree, ratio);
                axis = CalibrationSteps.DescribeCalibrationSweep(axis, seg, inst, ratio, cancellationToken); // Airy finesse fit, transverse modes
            }
            catch (InputException e) when (segments.Count > 1)
            {
                warnings.Add($"{seg.Name}: calibration segment skipped: {e.Message}");
                reasons.Add($"{seg.Name}: {e.Message}");
                continue;
            }

            if (!byDirection.TryGetValue(seg.Direction, out var have) || axis.PointCount > have.PointCount) byDirection[seg.Direction] = axis;
        }

        if (byDirection.Count == 0) throw new InputException($"no usable calibration segment in this file ({string.Join("; ", reasons)})", cal.File.Path);
        foreach (var a in byDirection.Values) warnings.AddRange(a.Warnings);
        return new CalibrationSteps.CalibrationAxes(byDirection.Values.ToList(), warnings);
    }

    /// <summary>λ_calibration / λ_source, 1 when the calibration states no wavelength.</summary>
    private static double WavelengthRatio(CalibrationSpec cal, Setup setup)
    {
        if (cal.WavelengthM is not double lc) return 1.0;
        if (setup.Solve.SourceWavelengthM is not double ls)
            throw new InputException($"the calibration for '{cal.Instrument}' states a laser wavelength ({Quantity.FormatLength(lc)}) but [solve] has no source_wavelength to transfer it to", setup.Path, cal.Line);
        return lc / ls;
    }
}
