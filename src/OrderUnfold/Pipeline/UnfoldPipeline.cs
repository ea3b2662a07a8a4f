using System.Security.Cryptography;
using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Units;

namespace OrderUnfold.Pipeline;

/// <summary>One unfold from a setup: read sweeps, calibrate the axes, solve, collect what happened.</summary>
public static class UnfoldPipeline
{
    /// <summary>Reads a setup file and runs it.</summary>
    public static UnfoldRun Run(string setupPath, IProgress<string>? progress = null, CalibrationSet? reuse = null) => Run(SetupReader.Read(setupPath), progress, reuse);

    /// <summary>Runs a setup. With <paramref name="reuse"/>, the setup's calibration sweeps are skipped and the saved axes
    /// and instrument parameters are used instead (archived sweeps of one session share one calibration).</summary>
    public static UnfoldRun Run(Setup setup, IProgress<string>? progress = null, CalibrationSet? reuse = null)
    {
        var warnings = new List<string>();
        var notes = new List<string>();
        var inputs = new List<InputFile>();
        if (setup.Path is not null) inputs.Add(Describe("setup", setup.Path));
        var (instruments, calibrations) = CalibrateAll(setup, progress, reuse, warnings, inputs);

        // source sweeps
        var calibrated = new List<CalibratedSweep>();
        var raw = new List<Sweep>();
        foreach (var spec in setup.Sweeps)
        {
            progress?.Report($"reading {Path.GetFileName(spec.File.Path)}");
            inputs.Add(Describe("sweep", spec.File.Path));
            var inst = Lookup(instruments, spec.Instrument, spec.File.Path);
            if (spec.File.RampFile is { } rampFile) inputs.Add(Describe("ramp", rampFile));
            // a fast sweep through a high-finesse cavity rings after each peak: the swept responses are replaced by their
            // static profiles at the resonance crossings before anything is fitted (Calibration/RingdownHandling.cs)
            foreach (var prepared in RingdownHandling.PrepareAll(ReadSegments(spec.File)))
            {
                var seg = prepared.Sweep;
                if (prepared.Corrected) notes.Add($"{seg.Name}: {prepared.Method}");
                var axis = FindAxis(calibrations, spec.Instrument, seg, warnings);
                if (axis is null)
                    throw new InputException($"no calibration for instrument '{spec.Instrument}' ({Direction(seg.Direction)} ramp): add a [[calibration]] table with a calibration-laser sweep for it, or set self_calibrate = \"auto\" in [solve]", setup.Path);
                // the axis is trusted inside its calibration points and, with a stated uncertainty, a bounded margin beyond
                // them; samples only go where that uncertainty exceeds a fraction of a linewidth (Calibration/AxisExtent.cs)
                var extent = AxisExtent.Evaluate(axis, seg.X, inst.LinewidthHz, inst.FsrHz);
                if (extent.Dropped > 0)
                {
                    var text = $"{seg.Name}: {extent.Dropped} of {seg.Count} samples lie too far beyond the outermost calibration points (x = {axis.Axis.XMin:G4} to {axis.Axis.XMax:G4}) for the axis to be extrapolated there within {new AxisExtentOptions().MaxSigmaLinewidths:0.##} linewidth and were not used";
                    if (extent.Dropped > 0.25 * seg.Count) warnings.Add(text);
                    else notes.Add(text);
                }

                if (extent.Extrapolated > 0)
                    notes.Add($"{seg.Name}: {extent.Extrapolated} samples beyond the outermost calibration points use the extrapolated axis (estimated axis uncertainty up to {Quantity.FormatFrequency(extent.MaxSigmaHz)}, included in the line sigmas)");
                // samples the digitiser clipped only bound the signal: left out of every fit
                var clipped = seg.ClippedSamples.ToHashSet();
                var kept = Enumerable.Range(0, extent.Keep.Length).Where(j => !clipped.Contains(extent.Keep[j])).ToArray();
                var keep = kept.Select(j => extent.Keep[j]).ToArray();
                var extrapolationSigma = kept.Select(j => extent.ExtrapolationSigmaHz[j]).ToArray();
                if (clipped.Count > 0) notes.Add($"{seg.Name}: {clipped.Count} samples at the digitiser's full scale (clipped) were left out");
                if (keep.Length < seg.Count) seg = seg with { X = keep.Select(i => seg.X[i]).ToArray(), Y = keep.Select(i => seg.Y[i]).ToArray(), ClippedSamples = [] };

                if (keep.Length < SweepReader.MinSamples)
                    throw new InputException($"{seg.Name}: only {keep.Length} samples lie within the calibrated range of the axis (x = {axis.Axis.XMin:G4} to {axis.Axis.XMax:G4}); expected the source and calibration records to share the same scan coordinate and ramp", spec.File.Path);

                var scan = axis.Axis.Evaluate(seg.X);
                var noise = NoiseEstimator.Estimate(seg.Y, seg.QuantisationStep);
                calibrated.Add(new CalibratedSweep(seg.Name, inst, scan, seg.Y, noise.Sigma)
                {
                    Noise = noise,
                    ExtrapolationSigmaHz = extent.Extrapolated > 0 ? extrapolationSigma : null,
                    // sweeps calibrated by the same axis share its errors: the axis object is their group
                    AxisUncertainty = axis.ShapeCovariance is { } cov ? new AxisUncertainty(axis, axis.Axis, cov, seg.X) : null,
                });
                raw.Add(seg);
            }
        }

        var solve = setup.Solve;
        var options = new UnfoldOptions
        {
            WindowStartHz = solve.WindowStartHz,
            WindowEndHz = solve.WindowEndHz,
            GridStepHz = solve.GridStepHz,
            Sparsity = solve.Sparsity,
            Smoothness = solve.Smoothness,
            Solver = solve.Solver,
            MaxMemoryBytes = (long)(solve.MaxMemoryGb * 1e9),
            // with the refinement on, the grid stage only proposes candidates and the refinement's significance test
            // decides (see LineRefiner.CandidateMinSnr); without it the grid is the answer
            MinSnr = solve.Refine ? Analysis.LineRefiner.CandidateMinSnr(solve.MinSnr, solve.Sparsity) : solve.MinSnr,
        };
        // ---- FSR refinement (issue 3): Vernier ratio and/or a known interval; see Calibration/FsrRefiner.cs ----
        UnfoldResult result;
        FsrRefinement? fsrRefinement = null;
        if (solve.RefineFsr || solve.KnownIntervalHz is not null)
        {
            progress?.Report("refining the FSRs from the lines");
            IReadOnlyList<CalibratedSweep> refined;
            (refined, result, fsrRefinement) = FsrRefiner.UnfoldWithRefinement(calibrated, options,
                new FsrRefineOptions { RefineRatio = solve.RefineFsr, KnownIntervalHz = solve.KnownIntervalHz }, progress);
            calibrated = refined.ToList();
            CalibrationSteps.ApplyFsrRefinement(fsrRefinement, instruments, calibrations);
            warnings.AddRange(fsrRefinement.Warnings);
        }
        else
        {
            result = Unfolder.Run(calibrated, options, progress);
        }

        // ---- end of FSR refinement ----
        Analysis.RefinementDiagnostics? refinement = null;
        if (solve.Refine)
        {
            progress?.Report("refining lines against the raw sweeps");
            var refineOptions = new Analysis.RefineOptions
            {
                FitWidths = solve.FitWidths,
                Bootstrap = solve.Bootstrap,
                MinSnr = solve.MinSnr,
                DoubtfulDeltaChiSquare = solve.DoubtfulDeltaChiSquare,
            };
            (result, refinement) = Analysis.LineRefiner.Refine(calibrated, result, refineOptions);
        }

        result = ExtrapolationShare.Apply(result, calibrated);

        return new UnfoldRun
        {
            Setup = setup,
            Inputs = inputs.DistinctBy(i => i.Path).ToList(),
            Instruments = instruments.Values.ToList(),
            Calibrations = calibrations,
            Sweeps = calibrated,
            RawSweeps = raw,
            Result = result,
            Refinement = refinement,
            FsrRefinement = fsrRefinement,
            Warnings = warnings,
            Notes = notes,
        };
    }


    /// <summary>Calibration only: the axes and instruments a setup's calibration sweeps give (for <c>calibrate</c>).</summary>
    public static CalibrationSet Calibrate(Setup setup, IProgress<string>? progress, out IReadOnlyList<string> warnings)
    {
        var w = new List<string>();
        var (instruments, calibrations) = CalibrateAll(setup, progress, null, w, []);
        warnings = w;
        return new CalibrationSet(instruments.Values.ToList(), calibrations, setup.Path ?? "setup");
    }

    private static (Dictionary<string, Instrument> Instruments, List<AxisCalibration> Calibrations) CalibrateAll(
        Setup setup, IProgress<string>? progress, CalibrationSet? reuse, List<string> warnings, List<InputFile> inputs)
    {
        var specs = setup.Instruments.ToDictionary(i => i.Name);
        var instruments = setup.Instruments.ToDictionary(i => i.Name, i => i.ToInstrument());

        // calibration sweeps → axes per (instrument, direction)
        var calibrations = new List<AxisCalibration>();
        if (reuse is not null)
        {
            CalibrationFile.CheckAgainst(reuse, setup.Instruments, reuse.Source);
            calibrations.AddRange(reuse.Axes);
            foreach (var inst in reuse.Instruments.Where(i => instruments.ContainsKey(i.Name))) instruments[inst.Name] = inst;
        }

        foreach (var cal in reuse is null ? setup.Calibrations : [])
        {
            progress?.Report($"calibrating {cal.Instrument} from {Path.GetFileName(cal.File.Path)}");
            inputs.Add(Describe("calibration", cal.File.Path));
            var inst = Lookup(instruments, cal.Instrument, cal.File.Path);
            var ratio = WavelengthRatio(cal, setup);
            var segments = ReadSegments(cal.File);
            var byDirection = new Dictionary<RampDirection, AxisCalibration>();
            var reasons = new List<string>();
            foreach (var seg in segments)
            {
                AxisCalibration axis;
                try
                {
                    axis = AxisCalibrator.FromCalibrationSweep(seg, inst, cal.AxisDegree, ratio);
                    axis = CalibrationSteps.DescribeCalibrationSweep(axis, seg, inst, ratio); // Airy finesse fit, transverse modes (issue 3)
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
            foreach (var a in byDirection.Values)
            {
                calibrations.Add(a);
                warnings.AddRange(a.Warnings);
            }
        }

        // ---- self-calibration from the source sweeps (issue 3); see Calibration/CalibrationSteps.cs ----
        if (reuse is null) CalibrationSteps.AddFromSources(setup, instruments, calibrations, warnings, progress, ReadSegments);
        // ---- end of self-calibration ----

        // effective finesse from the calibration peaks unless fixed (calibration sweeps first, then the source's own peaks)
        foreach (var (name, inst) in instruments.ToList())
        {
            var withFinesse = calibrations.Where(c => c.Instrument == name && c.Finesse is not null).ToList();
            if (withFinesse.Any(c => !c.FromRepeats)) withFinesse = withFinesse.Where(c => !c.FromRepeats).ToList();
            var measured = withFinesse.Select(c => c.Finesse!.Value).ToList();
            if (measured.Count == 0 || specs[name].FixFinesse || reuse is not null) continue;
            var f = measured.OrderBy(v => v).ElementAt(measured.Count / 2);
            if (Math.Abs(f / inst.Finesse - 1) > 0.2)
                warnings.Add($"instrument '{name}': measured finesse {f:F0} differs from the stated {inst.Finesse:F0} by more than 20 %; using the measured value (set fix_finesse = true to keep the stated one)");
            instruments[name] = inst with { Finesse = Math.Max(1, f) };
        }

        return (instruments, calibrations);
    }

    /// <summary>Reads a file's segments; for time scans x is made relative to each segment's start, so that a
    /// calibration made on one segment applies to another segment of the same direction.</summary>
    internal static IReadOnlyList<Sweep> ReadSegments(SweepFileOptions file)
    {
        var segments = SweepReader.ReadSweeps(file);
        if (segments.Count == 0) throw new InputException("no sweep segment of the requested ramp direction was found", file.Path);
        return segments.Select(s => s.Scan == ScanCoordinate.Time ? s with { X = s.X.Select(v => v - s.X[0]).ToArray() } : s).ToList();
    }

    private static AxisCalibration? FindAxis(List<AxisCalibration> calibrations, string instrument, Sweep seg, List<string> warnings)
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

    private static double WavelengthRatio(CalibrationSpec cal, Setup setup)
    {
        if (cal.WavelengthM is not double lc) return 1.0;
        if (setup.Solve.SourceWavelengthM is not double ls)
            throw new InputException($"the calibration for '{cal.Instrument}' states a laser wavelength ({Quantity.FormatLength(lc)}) but [solve] has no source_wavelength to transfer it to", setup.Path, cal.Line);
        return lc / ls;
    }

    private static Instrument Lookup(Dictionary<string, Instrument> instruments, string name, string file) =>
        instruments.TryGetValue(name, out var i) ? i : throw new InputException($"unknown instrument '{name}'", file);

    /// <summary>Size and SHA-256 of a file, read without modifying it.</summary>
    public static InputFile Describe(string role, string path)
    {
        using var stream = File.OpenRead(path);
        var hash = SHA256.HashData(stream);
        return new InputFile(role, Path.GetFullPath(path), stream.Length, Convert.ToHexString(hash).ToLowerInvariant());
    }
}
