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
    /// <summary>Reduced χ² of the grid fit above which a line refinement that ran out of its budget is not reported but refused
    /// (the grid's many lines then absorb a model mismatch).</summary>
    public const double PoorFitReducedChiSquare = 1.5;

    /// <summary>Most grid lines reported unrefined when the refinement runs out of its budget; more are refused.</summary>
    public const int MaxUnrefinedLines = 40;

    /// <summary>Reduced χ² of the final fit of any sweep above which the run is refused (the model cannot explain the data:
    /// a wrong FSR, a sweep assigned to the wrong instrument, a wrong finesse held fixed). A correct model with an honest
    /// noise estimate gives about 1. Measured data never match the model exactly: at a signal-to-noise ratio of a few
    /// hundred, an axis error of a tenth of a linewidth (a sparse calibration of a cubic piezo) or a baseline that drifts
    /// along the sweep already gives 20–50 while the lines are right (field trace 06, simulated four-FSR sweeps), and the
    /// run says so in a warning. A wrong FSR ratio or swapped files give 70 and more (ModelMismatchTests).</summary>
    public const double MismatchReducedChiSquare = 60;

    /// <summary>Reads a setup file and runs it.</summary>
    public static UnfoldRun Run(string setupPath, IProgress<string>? progress = null, CalibrationSet? reuse = null) => Run(SetupReader.Read(setupPath), progress, reuse);

    /// <summary>Runs a setup. With <paramref name="reuse"/>, the setup's calibration sweeps are skipped and the saved axes
    /// and instrument parameters are used instead (archived sweeps of one session share one calibration).</summary>
    public static UnfoldRun Run(Setup setup, IProgress<string>? progress = null, CalibrationSet? reuse = null)
    {
        try
        {
            return RunSetup(setup, progress, reuse);
        }
        catch (InputException e) when (e.File is null && setup.Path is not null)
        {
            throw e.At(setup.Path); // a problem of the [solve] settings: name the setup file
        }
    }

    private static UnfoldRun RunSetup(Setup setup, IProgress<string>? progress, CalibrationSet? reuse)
    {
        var warnings = new List<string>();
        var notes = new List<string>();
        var inputs = new List<InputFile>();
        if (setup.Path is not null) inputs.Add(Describe("setup", setup.Path));
        var (instruments, calibrations) = CalibrateAll(setup, progress, reuse, warnings, inputs);

        // source sweeps
        var calibrated = new List<CalibratedSweep>();
        var raw = new List<Sweep>();
        var segmentAxes = new List<(Sweep Segment, AxisCalibration Axis)>();
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
                segmentAxes.Add((seg, axis));
            }
        }

        // source lines broader than the calibration laser: solve with the response the source's own peaks show
        var fixedFinesse = setup.Instruments.Where(i => i.FixFinesse).Select(i => i.Name).ToHashSet();
        foreach (var w in SourceLineWidth.Apply(calibrated, segmentAxes, calibrations, fixedFinesse))
            notes.Add($"instrument '{w.Instrument}': the source's peaks are broader than the calibration laser's (apparent finesse {w.ApparentFinesse:F1} ± {w.ApparentSigma:F1} from {w.PeaksFitted} peaks, cavity {w.CavityFinesse:F1}): " +
                      $"its lines have a width of their own, about {Quantity.FormatFrequency(w.LineWidthHz)} FWHM (Lorentzian), and the source sweeps are solved with the broadened response");

        // a ramp segment that covers less than one FSR (a partial ramp at the start or end of a record) cannot be unfolded:
        // it is dropped with a warning naming why, and the other segments carry on; only when nothing is left is it an error
        var tooShort = Enumerable.Range(0, calibrated.Count).Where(k => Math.Abs(calibrated[k].ScanHz[^1] - calibrated[k].ScanHz[0]) < calibrated[k].Instrument.FsrHz).ToList();
        if (tooShort.Count > 0 && tooShort.Count < calibrated.Count)
        {
            foreach (var k in tooShort)
                warnings.Add($"{calibrated[k].Name}: dropped: it covers {Math.Abs(calibrated[k].ScanHz[^1] - calibrated[k].ScanHz[0]) / calibrated[k].Instrument.FsrHz:F2} FSR of '{calibrated[k].Instrument.Name}', less than the one full FSR a sweep needs to be unfolded; the other sweeps carry on");
            var keepSweeps = Enumerable.Range(0, calibrated.Count).Except(tooShort).ToList();
            var instrumentsLeft = keepSweeps.Select(k => calibrated[k].Instrument.Name).ToHashSet();
            var lost = calibrated.Select(c => c.Instrument.Name).Distinct().Where(n => !instrumentsLeft.Contains(n)).ToList();
            if (lost.Count > 0)
                throw new InputException($"no sweep of instrument '{lost[0]}' covers one full FSR, which a sweep needs to be unfolded (" +
                    string.Join("; ", tooShort.Where(k => calibrated[k].Instrument.Name == lost[0]).Select(k => $"{calibrated[k].Name}: {Math.Abs(calibrated[k].ScanHz[^1] - calibrated[k].ScanHz[0]) / calibrated[k].Instrument.FsrHz:F2} FSR")) +
                    "): sweep further", setup.Path);
            calibrated = keepSweeps.Select(k => calibrated[k]).ToList();
            raw = keepSweeps.Select(k => raw[k]).ToList();
            segmentAxes = keepSweeps.Select(k => segmentAxes[k]).ToList();
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
        WindowFinding? windowFinding = null;
        var refineRatio = solve.RefineFsr;
        if (refineRatio || solve.KnownIntervalHz is not null)
        {
            progress?.Report("refining the FSRs from the lines");
            IReadOnlyList<CalibratedSweep> refined;
            (refined, result, fsrRefinement) = FsrRefiner.UnfoldWithRefinement(calibrated, options,
                new FsrRefineOptions { RefineRatio = refineRatio, KnownIntervalHz = solve.KnownIntervalHz }, progress);
            calibrated = refined.ToList();
            CalibrationSteps.ApplyFsrRefinement(fsrRefinement, instruments, calibrations);
            warnings.AddRange(fsrRefinement.Warnings);
        }
        else
        {
            // a source wider than the default window is caught here and the window widened (Pipeline/WindowWidening.cs)
            var sweepsNow = calibrated;
            (result, windowFinding) = WindowWidening.Run(o => Unfolder.Run(sweepsNow, o, progress), options, calibrated.Select(c => c.Instrument).ToList(), progress);
        }

        // ---- end of FSR refinement ----
        // a model that cannot explain a sweep at all is not reported as a result: name the sweep and the likely causes
        void RefuseMismatch(UnfoldResult r, string stage)
        {
        var worst = Enumerable.Range(0, r.Sweeps.Count).MaxBy(k => r.Sweeps[k].ReducedChiSquare);
        if (r.Sweeps.Count > 0 && r.Sweeps[worst].ReducedChiSquare > MismatchReducedChiSquare)
        {
            var fit = r.Sweeps[worst];
            var sweep = calibrated[worst];
            var others = r.Sweeps.Where(f => f.ReducedChiSquare > MismatchReducedChiSquare).Select(f => f.Name).Distinct().ToList();
            throw new InputException(
                $"reduced χ² {fit.ReducedChiSquare:F0} on sweep {fit.Name} (instrument '{fit.Instrument}')" +
                (others.Count > 1 ? $" and {others.Count - 1} other sweep(s)" : "") +
                $" after the {stage} fit ({r.Lines.Count} line(s)): the model cannot explain the data, so no line list is reported. " +
                $"The stated FSR of '{fit.Instrument}' ({Quantity.FormatFrequency(sweep.Instrument.FsrHz, 6)}) or the sweep-to-instrument assignment (which file was taken with which cavity) is probably wrong" +
                (fsrRefinement is null ? "" : ", even after the FSR ratio was refined from the data") +
                $"; a noise σ far below the real noise would also do this (σ used: {sweep.NoiseSigma:G3})", setup.Path);
        }
        }

        // a grid fit this poor cannot be polished into a right answer: refuse before spending the refinement's budget
        RefuseMismatch(result, "grid");
        Analysis.RefinementDiagnostics? refinement = null;
        var gridResult = result;
        // without the refinement nothing checks the orders: a window wider than the unambiguous range holds aliases
        if (!solve.Refine && result.OrdersResolved && result.Grid.Count * result.Grid.StepHz > 1.01 * result.UnambiguousRangeHz)
            warnings.Add($"the window ({Quantity.FormatFrequency(result.Grid.Count * result.Grid.StepHz)}) is wider than the unambiguous range ({Quantity.FormatFrequency(result.UnambiguousRangeHz)}) " +
                         "and the line refinement is off, so no line's order was checked: lines about that range (or a multiple of it) apart may be aliases of one another (refine = true checks them)");
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
            // two cavities on a widened window: the grid's L1 cannot tell the true lines from mixtures of them, so the
            // explanation with the fewest lines is tried first and kept when it fits as well (Pipeline/FewestLines.cs)
            if (FewestLines.Applies(calibrated, result, windowFinding))
            {
                var (fewest, fewestRefinement, finding) = FewestLines.Run(calibrated, result, options, windowFinding!.HalfWidthHz, refineOptions, progress);
                progress?.Report($"fewest lines: {(finding.Kept ? "kept" : "not kept")}: {finding.Reason}");
                if (finding.Kept)
                {
                    result = fewest;
                    refinement = fewestRefinement;
                }
                else warnings.Add($"a fewest-lines explanation of the widened window ({finding.Proposed} line(s)) was tried and not kept: {finding.Reason}");
            }

            if (refinement is null) (result, refinement) = Analysis.LineRefiner.Refine(calibrated, result, refineOptions, progress);
        }

        // a line fit that ran out of its budget on a grid that fits poorly: the grid's many lines are the model's way of
        // absorbing a mismatch, not a measurement (the refinement's fallback is for a good grid that is slow to polish)
        // the same when the window had to be widened (near-aliases inside it: the unrefined grid cannot say which lines are
        // real) or the grid holds far more lines than a refinement could check
        var widened = windowFinding is not null ? $"; the window was widened to ±{Quantity.FormatFrequency(windowFinding.HalfWidthHz)} because the source looked wider than the first one, and the unrefined grid cannot tell lines from near-aliases there" : "";
        if (refinement is { FellBackToGrid: true, BudgetExhausted: not null } && (result.ReducedChiSquare > PoorFitReducedChiSquare || windowFinding is not null || result.Lines.Count > MaxUnrefinedLines))
            throw new InputException(
                $"the line fit ran out of its budget ({refinement.BudgetExhausted}) on {result.Lines.Count} grid line(s) (reduced χ² {result.ReducedChiSquare:F2}{widened}): " +
                "a spectrum explained by that many lines with a poor fit is the mark of a model that does not match the data, so no line list is reported. " +
                LikelyCauses(result, instruments, calibrations, fsrRefinement is not null), setup.Path);

        RefuseMismatch(result, refinement is null ? "grid" : "line");
        if (refinement is { FellBackToGrid: false }) RefuseWorseThanGrid(gridResult, result, setup.Path);
        // the cavity's transverse families fitted to the sweeps with the refined lines held (Analysis/FamilyFit.cs)
        if (refinement is not null) FitFamilies(calibrated, result, instruments, warnings, notes);
        result = FewerLines(result, solve.MinSnr, warnings);
        // a weak line on a family's peaks of a stronger line is that family's residue when one cavity measured it (FamilyResidue.cs)
        result = FamilyResidue.Apply(result, calibrated.Select(c => instruments.TryGetValue(c.Instrument.Name, out var i) ? i : c.Instrument).ToList(), calibrations, warnings);
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
            Window = windowFinding,
        };
    }


    /// <summary>
    /// A line fit that ends far worse than the grid it started from (a sweep's reduced χ² above
    /// <see cref="PoorFitReducedChiSquare"/> and above twice the grid's for that sweep) has lost or misplaced lines the grid
    /// explained — pruned as insignificant or moved to an alias — so its line list is not a measurement: refused, naming the
    /// sweeps and both χ². (Found with a window several times wider than the unambiguous range: the grid fitted with
    /// reduced χ² 1.2, the line fit kept 4 of 6 true lines at χ² 23–37, and nothing said so.)
    /// </summary>
    internal static void RefuseWorseThanGrid(UnfoldResult grid, UnfoldResult refined, string setupPath)
    {
        var worse = refined.Sweeps.Select(r => (r, g: grid.Sweeps.FirstOrDefault(g => g.Name == r.Name)))
            .Where(t => t.g is not null && t.r.ReducedChiSquare > PoorFitReducedChiSquare && t.r.ReducedChiSquare > 2 * t.g!.ReducedChiSquare)
            .ToList();
        if (worse.Count == 0) return;
        var wider = grid.OrdersResolved && grid.Grid.Count * grid.Grid.StepHz > grid.UnambiguousRangeHz * 1.01
            ? $"; the window ({Quantity.FormatFrequency(grid.Grid.Count * grid.Grid.StepHz)}) is wider than the unambiguous range ({Quantity.FormatFrequency(grid.UnambiguousRangeHz)}), where lines and their aliases fit alike: a narrower window, or a third cavity, settles it"
            : "";
        throw new InputException(
            $"the line fit ended far worse than the grid it started from ({string.Join(", ", worse.Select(t => $"{t.r.Name}: reduced χ² {t.r.ReducedChiSquare:F2} against {t.g!.ReducedChiSquare:F2}"))}; " +
            $"{refined.Lines.Count} line(s) kept of the grid's {grid.Lines.Count}): lines the grid explained were lost or moved to an alias, so no line list is reported{wider}", setupPath);
    }

    /// <summary>
    /// What to check when the model does not match the data, most suspect first, from the run's own evidence: an axis whose
    /// calibration fits its own peaks poorly or rests on few constraints, then (with two or more instruments) the stated FSRs
    /// and the sweep-to-instrument assignment, a finesse that could not be measured, and (one instrument) the cavity's own
    /// response. A single instrument has no FSR ratio to refine, so refine_fsr is not suggested there.
    /// </summary>
    internal static string LikelyCauses(UnfoldResult result, IReadOnlyDictionary<string, Instrument> instruments, IReadOnlyList<AxisCalibration> calibrations, bool fsrRefined)
    {
        var causes = new List<string>();
        // families the calibration laser shows that the instrument response does not include: every source line carries them
        foreach (var (name, inst) in instruments)
        {
            var unmodelled = calibrations.Where(c => c.Instrument == name && !c.FromRepeats && c.TransverseModes is not null)
                .SelectMany(c => c.TransverseModes!.Families.Where(f => f.Count >= 2 && f.RelativeHeight >= 0.03))
                .Where(f => !inst.Families.Any(k => PeriodDecider.CircularDistance(k.ApparentOffsetFsr, f.OffsetFsr) <= 0.01))
                .GroupBy(f => Math.Round(f.OffsetFsr, 2)).Select(g => g.First()).ToList();
            if (unmodelled.Count > 0)
                causes.Add($"transverse families of '{name}' that its calibration sweeps show but the model does not include (" +
                           string.Join(", ", unmodelled.Select(f => $"{f.OffsetFsr:F3} FSR after the main peaks, {100 * f.RelativeHeight:F0} %")) +
                           "): every source line carries them; align the beam to the cavity, or state mirror_radius so that their offsets are placed");
        }

        // the instruments of the sweeps that fit worst first
        var order = result.Sweeps.OrderByDescending(f => f.ReducedChiSquare).Select(f => f.Instrument).Distinct()
            .Concat(instruments.Keys).Distinct().Where(instruments.ContainsKey).ToList();
        foreach (var name in order)
        {
            var lw = instruments[name].LinewidthHz;
            var weak = calibrations.Where(c => c.Instrument == name && c.PointCount > 0)
                .Select(c => (c, Lw: c.ResidualRmsHz / lw, Few: c.FromRepeats && c.PairsUsed < 2 * (c.Axis.Degree + 1)))
                .Where(v => v.Lw > CalibrationSteps.JointResidualLinewidths || v.Few)
                .OrderByDescending(v => v.Lw).FirstOrDefault();
            if (weak.c is { } c)
                causes.Add($"the axis of '{name}' ({c.Source}: {c.Method}; residual {weak.Lw:F2} linewidths" +
                           (weak.Few ? $", only {c.PairsUsed} constraints for a degree-{c.Axis.Degree} polynomial" : "") +
                           "): add a calibration sweep or sweep over more FSRs");
        }

        if (instruments.Count >= 2)
        {
            causes.Add(fsrRefined ? "the stated FSRs (even after the refinement from the data: a known_interval pins the scale)" : "the stated FSRs (refine_fsr = true, or a known_interval)");
            causes.Add("which sweep file belongs to which instrument");
        }

        foreach (var (name, inst) in instruments)
            if (!calibrations.Any(c => c.Instrument == name && c.FinesseMeasured))
                causes.Add($"the finesse of '{name}' (the stated {inst.Finesse:G4} was used; no peak measured it)");
        if (instruments.Count == 1)
            causes.Add("the cavity's own response (transverse families or ring-down that the model leaves in the residuals; mirror_radius in the setup places the families)");
        causes.Add("the noise level (a σ far below the real noise makes every fit look poor)");
        return "Check, most suspect first: " + string.Join("; ", causes);
    }

    /// <summary>
    /// Fits each instrument's transverse families (offset and height) to its sweeps with the refined lines held and puts the
    /// fitted values into the instrument as reported cavity properties, when the fit converged, lowered χ² and moved no
    /// offset by more than a linewidth from the calibration's measurement (else the measured values stay, with a warning).
    /// The lines are not refitted: the families they were solved with are the measured ones.
    /// </summary>
    private static void FitFamilies(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult result, Dictionary<string, Instrument> instruments, List<string> warnings, List<string> notes)
    {
        foreach (var name in instruments.Keys.ToList())
        {
            var inst = instruments[name];
            if (inst.Families.Count == 0) continue;
            var fit = Analysis.FamilyFit.Fit(sweeps, result, name);
            if (fit is null) continue;
            var lw = inst.LinewidthHz / inst.FsrHz;
            var measured = inst.Families;
            var sane = fit.Families.Zip(measured).All(t => PeriodDecider.CircularDistance(t.First.ApparentOffsetFsr, t.Second.ApparentOffsetFsr) <= lw &&
                                                              t.First.RelativeHeight > 0 && double.IsFinite(t.First.OffsetSigmaFsr));
            if (!fit.Converged || !(fit.ChiSquareAfter <= fit.ChiSquareBefore) || !sane)
            {
                warnings.Add($"instrument '{name}': the fit of its transverse families to the sweeps did not settle (converged: {fit.Converged}, χ² {fit.ChiSquareBefore:G4} → {fit.ChiSquareAfter:G4}); the values measured from the peak heights are reported");
                continue;
            }

            instruments[name] = inst with
            {
                Families = fit.Families.Zip(measured).Select(t => new CavityModeFamily(t.Second.N, CavityModeFamily.Frac(-t.First.ApparentOffsetFsr), t.First.RelativeHeight,
                    $"fitted to the sweeps with the lines: {t.First.ApparentOffsetFsr:F5} ± {t.First.OffsetSigmaFsr:G2} FSR after TEM00, height {t.First.RelativeHeight:F4} ± {t.First.HeightSigma:G2} (statistical) " +
                    $"(measured from the peaks: {t.Second.ApparentOffsetFsr:F4}, {t.Second.RelativeHeight:F3})")).ToList(),
            };
            notes.Add($"instrument '{name}': transverse families fitted to the sweeps with the refined lines (χ² {fit.ChiSquareBefore:G6} → {fit.ChiSquareAfter:G6}, {fit.Iterations} iterations): " +
                      string.Join(", ", fit.Families.Select(f => $"N={f.N} at {f.ApparentOffsetFsr:F5} ± {f.OffsetSigmaFsr:G2} FSR, {100 * f.RelativeHeight:F1} ± {100 * f.HeightSigma:G2} % (statistical σ)")));
        }
    }

    /// <summary>
    /// When the data cannot tell a line from its alias, the explanation with fewer lines is preferred: a weak line
    /// (SNR below twice min_snr) whose order the refinement found doubtful is left out of the line list and named in a
    /// warning. Such lines are what a slightly imperfect model leaves near the aliases of strong lines; a real weak
    /// line is not lost, only not claimed.
    /// </summary>
    internal static UnfoldResult FewerLines(UnfoldResult result, double minSnr, List<string> warnings)
    {
        if (!result.OrdersResolved) return result;
        var weak = result.Lines.Where(l => l.Verdict == Analysis.OrderVerdict.Doubtful && l.Snr < 2 * minSnr && l.FrequencyHz != 0).ToList();
        if (weak.Count == 0) return result;
        warnings.Add($"{weak.Count} weak line(s) whose order the data cannot pin were left out (an alias fits almost as well and the SNR is below {2 * minSnr:0.#}; " +
                     "the explanation with fewer lines is kept): " + string.Join(", ", weak.Select(l => $"{Quantity.FormatFrequency(l.FrequencyHz)} (SNR {l.Snr:F1}, intensity {l.Intensity:F4})")));
        return result with { Lines = result.Lines.Except(weak).ToList() };
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
            // calibration sweeps ring too when swept fast: the same preparation as the source sweeps
            var segments = RingdownHandling.PrepareAll(ReadSegments(cal.File)).Select(p => p.Sweep).ToList();
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
            if (measured.Count == 0 || reuse is not null) continue;
            var f = measured.OrderBy(v => v).ElementAt(measured.Count / 2);
            if (specs[name].FixFinesse)
            {
                // the stated value is kept, as asked; but a fit with a linewidth the peaks contradict explains every line
                // with a cloud of false ones (too narrow) or merges neighbours (too wide): that is refused, not reported
                var factor = Math.Max(f / inst.Finesse, inst.Finesse / f);
                if (factor > 1.5)
                    throw new InputException($"instrument '{name}': fix_finesse = true keeps the stated finesse {inst.Finesse:G4}, but the calibration peaks measure {f:G4} ({factor:F1}× {(f < inst.Finesse ? "lower" : "higher")}); a fit with the stated linewidth would report false or merged lines. Correct the finesse or set fix_finesse = false to use the measured value", setup.Path);
                if (factor > 1.2)
                    warnings.Add($"instrument '{name}': the calibration peaks measure finesse {f:F0}, {factor:F2}× the stated (fixed) {inst.Finesse:F0}; the stated value is used as fix_finesse = true asks, and line widths and intensities carry that error");
                continue;
            }

            if (Math.Abs(f / inst.Finesse - 1) > 0.2)
                warnings.Add($"instrument '{name}': measured finesse {f:F0} differs from the stated {inst.Finesse:F0} by more than 20 %; using the measured value (set fix_finesse = true to keep the stated one)");
            instruments[name] = inst with { Finesse = Math.Max(1, f) };
        }

        // the period decided from the peak pattern, the cavity's transverse families, and whether the finesse was measured
        if (reuse is null) CalibrationSteps.ApplyCavityProperties(instruments, calibrations, warnings, n => specs[n].FixFinesse);

        return (instruments, calibrations);
    }

    /// <summary>Reads a file's segments; for time scans x is made relative to each segment's start, so that a
    /// calibration made on one segment applies to another segment of the same direction.</summary>
    internal static IReadOnlyList<Sweep> ReadSegments(SweepFileOptions file)
    {
        var segments = SweepReader.ReadSweeps(file);
        if (segments.Count == 0) throw new InputException("no sweep segment of the requested ramp direction was found", file.Path);
        foreach (var seg in segments)
            if (InvertedSignal(seg.Y) is { } why)
                throw new InputException($"{seg.Name}: the signal's peaks point down ({why}): a transmission sweep has a low baseline and peaks upward, so this signal looks inverted (a negated channel, an inverting amplifier, or a reflection signal); negate the column before the analysis", file.Path);
        return segments.Select(s => s.Scan == ScanCoordinate.Time ? s with { X = s.X.Select(v => v - s.X[0]).ToArray() } : s).ToList();
    }

    /// <summary>
    /// Null for a signal whose peaks point up; otherwise what shows that they point down. A transmission sweep spends most
    /// of its samples near its baseline, between the peaks, so the median sits near the minimum: the distance from the
    /// median to the maximum exceeds that to the minimum. The test asks for the reverse by a factor of 4, with the dips
    /// at least 20 noise σ deep (the median absolute difference of neighbouring samples) so that noise alone never trips it.
    /// </summary>
    internal static string? InvertedSignal(IReadOnlyList<double> y)
    {
        if (y.Count < 16) return null;
        var sorted = y.Where(double.IsFinite).OrderBy(v => v).ToArray();
        if (sorted.Length < 16) return null;
        double min = sorted[0], max = sorted[^1], median = sorted[sorted.Length / 2];
        var sigma = NoiseEstimator.FirstDifferenceSigma(y.ToArray());
        var down = median - min;
        var up = max - median;
        if (down > 4 * up && down > 20 * sigma)
            return $"baseline (median) {median:G4}, maximum {max:G4} only {up:G3} above it, minimum {min:G4} {down:G3} below it";
        return null;
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
        InputLimits.CheckFile(path, role + " file"); // never hash a device, a FIFO or an oversized file
        using var stream = File.OpenRead(path);
        var hash = SHA256.HashData(stream);
        return new InputFile(role, Path.GetFullPath(path), stream.Length, Convert.ToHexString(hash).ToLowerInvariant());
    }
}
