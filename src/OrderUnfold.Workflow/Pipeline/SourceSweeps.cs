using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using OrderUnfold.Units;

namespace OrderUnfold.Pipeline;

/// <summary>The source sweeps ready for the unfold.</summary>
/// <param name="Sweeps">Calibrated sweeps (scan frequency, signal, noise σ) with the settled instruments.</param>
/// <param name="Raw">The raw segments in the same order (scan coordinate for plots and reports).</param>
/// <param name="Axes">The axis each sweep was calibrated with, in the same order.</param>
/// <param name="Warnings">What the user should check.</param>
/// <param name="Notes">What was done that needs no action.</param>
/// <param name="Inputs">The sweep and ramp files read.</param>
internal sealed record SourceSweepSet(IReadOnlyList<CalibratedSweep> Sweeps, IReadOnlyList<Sweep> Raw, IReadOnlyList<AxisCalibration> Axes,
    IReadOnlyList<string> Warnings, IReadOnlyList<string> Notes, IReadOnlyList<InputFile> Inputs);

/// <summary>The source files as read and prepared, before any axis is applied.</summary>
/// <param name="Files">Each [[sweep]] table with its segments (ring-down replaced by the static response).</param>
/// <param name="Inputs">The sweep and ramp files read.</param>
internal sealed record SourceSegments(IReadOnlyList<(SweepSpec Spec, IReadOnlyList<RingdownPreparation> Segments)> Files, IReadOnlyList<InputFile> Inputs);

/// <summary>
/// The stage that turns the setup's source files into calibrated sweeps with the settled instruments. The files are read
/// once (<see cref="ReadFiles"/>: each file's segments, ring-down replaced by the static response); <see cref="Build"/> puts
/// them on the settled axes: the samples the axis covers and the digitiser did not clip, and the noise; then the response of
/// sources whose lines are broader than the calibration laser (<see cref="SourceLineWidth"/>), and the partial ramps that
/// cover less than one FSR left out. The FSR decision builds trial sweeps this way before the FSRs are decided
/// (<see cref="FsrDecisionStage"/>); the sweeps of the results are built once, at the decided FSRs.
/// </summary>
internal static class SourceSweeps
{
    /// <summary>Reads and prepares every source file of the setup (each instrument named must exist).</summary>
    public static SourceSegments ReadFiles(Setup setup, IReadOnlyDictionary<string, Instrument> instruments, IProgress<string>? progress, CancellationToken cancellationToken)
    {
        var files = new List<(SweepSpec, IReadOnlyList<RingdownPreparation>)>();
        var inputs = new List<InputFile>();
        foreach (var spec in setup.Sweeps)
        {
            progress?.Report($"reading {Path.GetFileName(spec.File.Path)}");
            inputs.Add(UnfoldPipeline.Describe("sweep", spec.File.Path));
            UnfoldPipeline.Lookup(instruments, spec.Instrument, spec.File.Path);
            if (spec.File.RampFile is { } rampFile) inputs.Add(UnfoldPipeline.Describe("ramp", rampFile));
            // a fast sweep through a high-finesse cavity rings after each peak: the swept responses are replaced by their
            // static profiles at the resonance crossings before anything is fitted (Calibration/RingdownHandling.cs)
            files.Add((spec, RingdownHandling.PrepareAll(UnfoldPipeline.ReadSegments(spec.File, cancellationToken))));
        }

        return new SourceSegments(files, inputs);
    }

    /// <summary>The segments of <paramref name="read"/> on the axes of <paramref name="settled"/>, with its instruments.</summary>
    public static SourceSweepSet Build(Setup setup, SourceSegments read, SettledInstruments settled)
    {
        var sweeps = new List<CalibratedSweep>();
        var raw = new List<Sweep>();
        var axes = new List<AxisCalibration>();
        var warnings = new List<string>();
        var notes = new List<string>();
        foreach (var (spec, segments) in read.Files)
        {
            var inst = UnfoldPipeline.Lookup(settled.Instruments, spec.Instrument, spec.File.Path);
            foreach (var prepared in segments)
            {
                if (prepared.Corrected) notes.Add($"{prepared.Sweep.Name}: {prepared.Method}");
                var axis = FindAxis(settled.Calibrations, spec.Instrument, prepared.Sweep, warnings)
                           ?? throw new InputException($"no calibration for instrument '{spec.Instrument}' ({Direction(prepared.Sweep.Direction)} ramp): add a [[calibration]] table with a calibration-laser sweep for it, or set self_calibrate = \"auto\" in [solve]", setup.Path);
                var (sweep, segment) = Calibrate(prepared.Sweep, axis, inst, spec.File.Path, warnings, notes);
                sweeps.Add(sweep);
                raw.Add(segment);
                axes.Add(axis);
            }
        }

        // source lines broader than the calibration laser: solve with the response the source's own peaks show
        var fixedFinesse = setup.Instruments.Where(i => i.FixFinesse).Select(i => i.Name).ToHashSet();
        var (broadened, findings) = SourceLineWidth.Apply(sweeps, raw.Zip(axes).ToList(), settled.Calibrations, fixedFinesse);
        foreach (var w in findings)
            notes.Add($"instrument '{w.Instrument}': the source's peaks are broader than the calibration laser's (apparent finesse {w.ApparentFinesse:F1} ± {w.ApparentSigma:F1} from {w.PeaksFitted} peaks, cavity {w.CavityFinesse:F1}): " +
                      $"its lines have a width of their own, about {Quantity.FormatFrequency(w.LineWidthHz)} FWHM (Lorentzian), and the source sweeps are solved with the broadened response");
        var set = new SourceSweepSet(broadened, raw, axes, warnings, notes, read.Inputs);
        return DropPartialRamps(set, setup.Path);
    }

    /// <summary>
    /// One segment on its axis: the axis is trusted inside its calibration points and, with a stated uncertainty, a bounded
    /// margin beyond them (samples only go where that uncertainty exceeds a fraction of a linewidth; Calibration/AxisExtent.cs);
    /// samples the digitiser clipped only bound the signal and are left out of every fit. Also the segment as kept.
    /// </summary>
    private static (CalibratedSweep Sweep, Sweep Segment) Calibrate(Sweep seg, AxisCalibration axis, Instrument inst, string file, List<string> warnings, List<string> notes)
    {
        var extent = AxisExtent.Evaluate(axis, seg.X, inst.LinewidthHz, inst.FsrHz);
        if (extent.Dropped > 0)
        {
            var text = $"{seg.Name}: {extent.Dropped} of {seg.Count} samples lie too far beyond the outermost calibration points (x = {axis.Axis.XMin:G4} to {axis.Axis.XMax:G4}) for the axis to be extrapolated there within {new AxisExtentOptions().MaxSigmaLinewidths:0.##} linewidth and were not used";
            if (extent.Dropped > 0.25 * seg.Count) warnings.Add(text);
            else notes.Add(text);
        }

        if (extent.Extrapolated > 0)
            notes.Add($"{seg.Name}: {extent.Extrapolated} samples beyond the outermost calibration points use the extrapolated axis (estimated axis uncertainty up to {Quantity.FormatFrequency(extent.MaxSigmaHz)}, included in the line sigmas)");
        var clipped = seg.ClippedSamples.ToHashSet();
        var kept = Enumerable.Range(0, extent.Keep.Length).Where(j => !clipped.Contains(extent.Keep[j])).ToArray();
        var keep = kept.Select(j => extent.Keep[j]).ToArray();
        var extrapolationSigma = kept.Select(j => extent.ExtrapolationSigmaHz[j]).ToArray();
        if (clipped.Count > 0) notes.Add($"{seg.Name}: {clipped.Count} samples at the digitiser's full scale (clipped) were left out");
        if (keep.Length < seg.Count) seg = seg with { X = keep.Select(i => seg.X[i]).ToArray(), Y = keep.Select(i => seg.Y[i]).ToArray(), ClippedSamples = [] };

        if (keep.Length < SweepReader.MinSamples)
            throw new InputException($"{seg.Name}: only {keep.Length} samples lie within the calibrated range of the axis (x = {axis.Axis.XMin:G4} to {axis.Axis.XMax:G4}); expected the source and calibration records to share the same scan coordinate and ramp", file);

        var scan = axis.Axis.Evaluate(seg.X);
        var noise = NoiseEstimator.Estimate(seg.Y, seg.QuantisationStep);
        var sweep = new CalibratedSweep(seg.Name, inst, scan, seg.Y, noise.Sigma)
        {
            Noise = noise,
            ExtrapolationSigmaHz = extent.Extrapolated > 0 ? extrapolationSigma : null,
            // sweeps calibrated by the same axis share its errors: the axis object is their group
            AxisUncertainty = axis.ShapeCovariance is { } cov ? new AxisUncertainty(axis, axis.Axis, cov, seg.X) : null,
        };
        return (sweep, seg);
    }

    /// <summary>
    /// A ramp segment that covers less than one FSR (a partial ramp at the start or end of a record) cannot be unfolded: it
    /// is dropped with a warning naming why, and the other segments carry on; only when an instrument is left without a
    /// sweep is it an error.
    /// </summary>
    private static SourceSweepSet DropPartialRamps(SourceSweepSet set, string? setupPath)
    {
        var calibrated = set.Sweeps;
        double Span(int k) => Math.Abs(calibrated[k].ScanHz[^1] - calibrated[k].ScanHz[0]) / calibrated[k].Instrument.FsrHz;
        var tooShort = Enumerable.Range(0, calibrated.Count).Where(k => Math.Abs(calibrated[k].ScanHz[^1] - calibrated[k].ScanHz[0]) < calibrated[k].Instrument.FsrHz).ToList();
        if (tooShort.Count == 0 || tooShort.Count == calibrated.Count) return set;
        var warnings = set.Warnings.Concat(tooShort.Select(k =>
            $"{calibrated[k].Name}: dropped: it covers {Span(k):F2} FSR of '{calibrated[k].Instrument.Name}', less than the one full FSR a sweep needs to be unfolded; the other sweeps carry on")).ToList();
        var keep = Enumerable.Range(0, calibrated.Count).Except(tooShort).ToList();
        var instrumentsLeft = keep.Select(k => calibrated[k].Instrument.Name).ToHashSet();
        var lost = calibrated.Select(c => c.Instrument.Name).Distinct().Where(n => !instrumentsLeft.Contains(n)).ToList();
        if (lost.Count > 0)
            throw new InputException($"no sweep of instrument '{lost[0]}' covers one full FSR, which a sweep needs to be unfolded (" +
                string.Join("; ", tooShort.Where(k => calibrated[k].Instrument.Name == lost[0]).Select(k => $"{calibrated[k].Name}: {Span(k):F2} FSR")) +
                "): sweep further", setupPath);
        return set with
        {
            Sweeps = keep.Select(k => calibrated[k]).ToList(),
            Raw = keep.Select(k => set.Raw[k]).ToList(),
            Axes = keep.Select(k => set.Axes[k]).ToList(),
            Warnings = warnings,
        };
    }

    /// <summary>The axis of a segment: self-calibrated from this segment, else of the same ramp direction, else (with a
    /// warning about hysteresis) a single-direction one; null when there is none.</summary>
    private static AxisCalibration? FindAxis(IReadOnlyList<AxisCalibration> calibrations, string instrument, Sweep seg, List<string> warnings)
    {
        var mine = calibrations.Where(c => c.Instrument == instrument).ToList();
        if (mine.Count == 0) return null;
        var exact = mine.FirstOrDefault(c => c.Direction == seg.Direction && c.Source == seg.Name) // self-calibrated from this segment
                    ?? mine.FirstOrDefault(c => c.Direction == seg.Direction);
        if (exact is not null) return exact;
        // a single-direction calibration is usable for a single-direction sweep and vice versa when the ramp is the same kind
        var single = mine.FirstOrDefault(c => c.Direction == RampDirection.Single || seg.Direction == RampDirection.Single);
        if (single is not null)
        {
            warnings.Add($"{seg.Name}: calibrated with the {Direction(single.Direction)} ramp of the calibration sweep; piezo hysteresis may differ between directions");
            return single;
        }

        return null;
    }

    private static string Direction(RampDirection d) => d switch
    {
        RampDirection.Up => "up",
        RampDirection.Down => "down",
        _ => "single",
    };
}
