using OrderUnfold.Analysis;
using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Units;

namespace OrderUnfold.Pipeline;

/// <summary>
/// The checks that refuse a run whose model cannot explain the data (so that no confident wrong line list is reported),
/// and the one that prefers the explanation with fewer lines where the data cannot pin an order.
/// </summary>
internal static class RunChecks
{
    /// <summary>A model that cannot explain a sweep at all is not reported as a result: names the worst sweep (reduced χ²
    /// above <see cref="UnfoldPipeline.MismatchReducedChiSquare"/>) and the likely causes. Two causes are told from the
    /// sweep itself before the setup is blamed: a misfit held by a few samples (<see cref="GlitchShare"/>: a glitch or a
    /// spike in the record, which no FSR explains) and peaks sampled too coarsely to be placed
    /// (<see cref="UndersampledSamplesPerLinewidth"/>).</summary>
    public static void RefuseMismatch(UnfoldResult r, IReadOnlyList<CalibratedSweep> sweeps, string stage, bool fsrRefined, string? setupPath)
    {
        var worst = Enumerable.Range(0, r.Sweeps.Count).MaxBy(k => r.Sweeps[k].ReducedChiSquare);
        if (r.Sweeps.Count == 0 || !(r.Sweeps[worst].ReducedChiSquare > UnfoldPipeline.MismatchReducedChiSquare)) return;
        var fit = r.Sweeps[worst];
        var sweep = sweeps[worst];
        var others = r.Sweeps.Where(f => f.ReducedChiSquare > UnfoldPipeline.MismatchReducedChiSquare).Select(f => f.Name).Distinct().ToList();
        var head = $"reduced χ² {fit.ReducedChiSquare:F0} on sweep {fit.Name} (instrument '{fit.Instrument}')" +
                   (others.Count > 1 ? $" and {others.Count - 1} other sweep(s)" : "") +
                   $" after the {stage} fit ({r.Lines.Count} line(s)): the model cannot explain the data, so no line list is reported. ";
        if (Glitch(fit, sweep) is { } glitch) throw new InputException(head + glitch, setupPath);
        var perLinewidth = SamplesPerLinewidth(sweep);
        throw new InputException(head +
            (perLinewidth < UndersampledSamplesPerLinewidth
                ? $"The sweep has {perLinewidth:F1} samples per linewidth of '{fit.Instrument}' ({Quantity.FormatFrequency(sweep.Instrument.LinewidthHz)}): its peaks are sampled too coarsely to be placed, which alone can do this; record more samples per sweep or sweep more slowly. Otherwise, the "
                : "The ") +
            $"stated FSR of '{fit.Instrument}' ({Quantity.FormatFrequency(sweep.Instrument.FsrHz, 6)}) or the sweep-to-instrument assignment (which file was taken with which cavity) is probably wrong" +
            (fsrRefined ? ", even after the FSR ratio was refined from the data" : "") +
            $"; a noise σ far below the real noise would also do this (σ used: {sweep.NoiseSigma:G3})", setupPath);
    }

    /// <summary>Share of a sweep's χ² that its <see cref="GlitchSamples"/> largest residuals must hold for the misfit to be
    /// named a glitch: more than half. A wrong FSR, a wrong assignment or a wrong finesse spread the misfit over every
    /// peak of the sweep, tens of samples at least (chosen here, not from a reference).</summary>
    public const double GlitchShare = 0.5;

    /// <summary>Residuals counted by <see cref="GlitchShare"/>.</summary>
    public const int GlitchSamples = 3;

    /// <summary>Fewer samples per linewidth than this and a sweep's peaks cannot be placed well enough for the model (a peak
    /// then falls between samples; common practice asks for several samples across a peak's width).</summary>
    public const double UndersampledSamplesPerLinewidth = 2;

    /// <summary>The misfit explained as a glitch when the largest few residuals hold most of χ², or null.</summary>
    private static string? Glitch(SweepFit fit, CalibratedSweep sweep)
    {
        var y = sweep.Signal;
        if (fit.Model.Length != y.Length || y.Length < 10 * GlitchSamples || !(sweep.NoiseSigma > 0)) return null;
        var squares = new double[y.Length];
        var total = 0.0;
        for (var i = 0; i < y.Length; i++)
        {
            var z = (y[i] - fit.Model[i]) / sweep.NoiseSigma;
            squares[i] = z * z;
            total += squares[i];
        }

        var order = Enumerable.Range(0, y.Length).OrderByDescending(i => squares[i]).Take(GlitchSamples).ToList();
        var share = order.Sum(i => squares[i]) / total;
        if (!(share > GlitchShare)) return null;
        var largest = order[0];
        return $"{GlitchSamples} of its {y.Length} samples hold {100 * share:F0} % of that χ²; the largest, sample {largest + 1} of the sweep " +
               $"(value {y[largest]:G6}, the model {fit.Model[largest]:G6}), lies {Math.Sqrt(squares[largest]):G3} σ from the model: a glitch or spike in the record, " +
               "which no FSR or line explains. Remove or repair those samples (or cut the sweep before them) and run again.";
    }

    /// <summary>Median number of samples per linewidth along a sweep's calibrated axis.</summary>
    internal static double SamplesPerLinewidth(CalibratedSweep sweep)
    {
        var steps = new List<double>(sweep.ScanHz.Length);
        for (var i = 1; i < sweep.ScanHz.Length; i++) steps.Add(Math.Abs(sweep.ScanHz[i] - sweep.ScanHz[i - 1]));
        if (steps.Count == 0) return double.PositiveInfinity;
        steps.Sort();
        var median = steps[steps.Count / 2];
        return median > 0 ? sweep.Instrument.LinewidthHz / median : double.PositiveInfinity;
    }

    /// <summary>
    /// A line fit that ran out of its budget on a grid that fits poorly: the grid's many lines are the model's way of
    /// absorbing a mismatch, not a measurement (the refinement's fallback is for a good grid that is slow to polish); the
    /// same when the window had to be widened (near-aliases inside it: the unrefined grid cannot say which lines are real)
    /// or the grid holds far more lines than a refinement could check (<see cref="UnfoldPipeline.MaxUnrefinedLines"/>).
    /// </summary>
    public static void RefuseExhaustedBudget(LineStage lines, GridStage grid, SettledInstruments settled, string? setupPath)
    {
        var result = lines.Result;
        var window = grid.Window;
        if (lines.Refinement is not { FellBackToGrid: true, BudgetExhausted: not null } refinement ||
            !(result.ReducedChiSquare > UnfoldPipeline.PoorFitReducedChiSquare || window is not null || result.Lines.Count > UnfoldPipeline.MaxUnrefinedLines)) return;
        var widened = window is not null ? $"; the window was widened to ±{Quantity.FormatFrequency(window.HalfWidthHz)} because the source looked wider than the first one, and the unrefined grid cannot tell lines from near-aliases there" : "";
        throw new InputException(
            $"the line fit ran out of its budget ({refinement.BudgetExhausted}) on {result.Lines.Count} grid line(s) (reduced χ² {result.ReducedChiSquare:F2}{widened}): " +
            "a spectrum explained by that many lines with a poor fit is the mark of a model that does not match the data, so no line list is reported. " +
            LikelyCauses(result, settled.Instruments, settled.Calibrations, grid.FsrRefinement is not null), setupPath);
    }

    /// <summary>
    /// A line fit that ends far worse than the grid it started from (a sweep's reduced χ² above
    /// <see cref="UnfoldPipeline.PoorFitReducedChiSquare"/> and above twice the grid's for that sweep) has lost or misplaced lines the grid
    /// explained — pruned as insignificant or moved to an alias — so its line list is not a measurement: refused, naming the
    /// sweeps and both χ². (Found with a window several times wider than the unambiguous range: the grid fitted with
    /// reduced χ² 1.2, the line fit kept 4 of 6 true lines at χ² 23–37, and nothing said so.)
    /// </summary>
    internal static void RefuseWorseThanGrid(UnfoldResult grid, UnfoldResult refined, string setupPath)
    {
        var worse = refined.Sweeps.Select(r => (r, g: grid.Sweeps.FirstOrDefault(g => g.Name == r.Name)))
            .Where(t => t.g is not null && t.r.ReducedChiSquare > UnfoldPipeline.PoorFitReducedChiSquare && t.r.ReducedChiSquare > 2 * t.g!.ReducedChiSquare)
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
    /// When the data cannot tell a line from its alias, the explanation with fewer lines is preferred: a weak line
    /// (SNR below twice min_snr) whose order the refinement found doubtful is left out of the line list and named in a
    /// warning. Such lines are what a slightly imperfect model leaves near the aliases of strong lines; a real weak
    /// line is not lost, only not claimed.
    /// </summary>
    internal static (UnfoldResult Result, string? Warning) FewerLines(UnfoldResult result, double minSnr)
    {
        if (!result.OrdersResolved) return (result, null);
        var weak = result.Lines.Where(l => l.Verdict == OrderVerdict.Doubtful && l.Snr < 2 * minSnr && l.FrequencyHz != 0).ToList();
        if (weak.Count == 0) return (result, null);
        var warning = $"{weak.Count} weak line(s) whose order the data cannot pin were left out (an alias fits almost as well and the SNR is below {2 * minSnr:0.#}; " +
                      "the explanation with fewer lines is kept): " + string.Join(", ", weak.Select(l => $"{Quantity.FormatFrequency(l.FrequencyHz)} (SNR {l.Snr:F1}, intensity {l.Intensity:F4})"));
        return (result with { Lines = result.Lines.Except(weak).ToList() }, warning);
    }
}
