using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Units;

namespace OrderUnfold.Calibration;

/// <summary>Options of <see cref="FsrRefiner"/>.</summary>
public sealed record FsrRefineOptions
{
    /// <summary>Refine the FSR ratios between instruments from the Vernier pattern.</summary>
    public bool RefineRatio { get; init; } = true;

    /// <summary>A frequency interval known to separate lines (RF sidebands of a phase modulator at this frequency,
    /// a known splitting), Hz; it calibrates the absolute FSR scale. Null: the stated FSR of the reference stays.</summary>
    public double? KnownIntervalHz { get; init; }

    /// <summary>Instrument whose stated FSR fixes the scale when no interval is known (null: the first).</summary>
    public string? ReferenceInstrument { get; init; }

    /// <summary>Line pairs whose separation is within this fraction (plus two linewidths) of a multiple of the known
    /// interval are taken to be separated by it.</summary>
    public double IntervalTolerance { get; init; } = 0.015;

    /// <summary>Largest multiple of the known interval looked for (2: first-order sidebands on both sides).</summary>
    public int MaxIntervalMultiple { get; init; } = 2;

    /// <summary>Most refine-and-unfold rounds.</summary>
    public int MaxRounds { get; init; } = 3;

    /// <summary>Lines below this signal-to-noise ratio do not take part.</summary>
    public double MinSnr { get; init; } = 8;

    /// <summary>Most lines used (the strongest).</summary>
    public int MaxLines { get; init; } = 14;

    /// <summary>Largest relative FSR error the pre-scan of folded peaks looks for (default 2.5 %).</summary>
    public double MaxScaleError { get; init; } = 0.025;

    /// <summary>CPU seconds (of the calling thread) that the per-instrument line fits of all rounds may use together;
    /// when used up the rounds stop with a warning and the FSRs stay as far as the finished rounds took them.</summary>
    public double CpuBudgetSeconds { get; init; } = 5;
}

/// <summary>The refined FSR of one instrument.</summary>
/// <param name="Instrument">Instrument name.</param>
/// <param name="NominalFsrHz">FSR before refinement (as stated or calibrated).</param>
/// <param name="RefinedFsrHz">FSR after refinement.</param>
/// <param name="SigmaHz">Standard uncertainty of the refined FSR (of the ratio only, when no interval is known).</param>
/// <param name="RelativeChange">RefinedFsrHz / NominalFsrHz − 1.</param>
/// <param name="Basis">What fixed it ("reference", "Vernier ratio", "known interval", …).</param>
public sealed record InstrumentScale(string Instrument, double NominalFsrHz, double RefinedFsrHz, double SigmaHz, double RelativeChange, string Basis);

/// <summary>A pair of lines taken to be a known interval (or a multiple of it) apart.</summary>
/// <param name="LowerHz">Lower line after refinement, relative to the anchor.</param>
/// <param name="UpperHz">Upper line after refinement.</param>
/// <param name="Multiple">How many intervals separate them.</param>
/// <param name="StatedHz">Multiple × the stated interval.</param>
/// <param name="MeasuredHz">Separation in the refined result.</param>
/// <param name="SigmaHz">Standard uncertainty of the measured separation before refinement (from the line fits).</param>
public sealed record IntervalMatch(double LowerHz, double UpperHz, int Multiple, double StatedHz, double MeasuredHz, double SigmaHz);

/// <summary>How one line moved because of the refinement.</summary>
public sealed record LineShift(double BeforeHz, double AfterHz)
{
    public double ShiftHz => AfterHz - BeforeHz;
}

/// <summary>What <see cref="FsrRefiner.RefineAndRerun"/> did.</summary>
/// <param name="Instruments">Refined FSR per instrument.</param>
/// <param name="Intervals">Line pairs matched to the known interval.</param>
/// <param name="Rounds">Refine-and-unfold rounds run.</param>
/// <param name="ReducedChiSquareBefore">Reduced χ² of the unfold with the nominal FSRs.</param>
/// <param name="ReducedChiSquareAfter">Reduced χ² with the refined FSRs.</param>
/// <param name="LineShifts">Each line of the refined result with its nearest line before refinement.</param>
/// <param name="Warnings">What looked wrong.</param>
/// <param name="Notes">What was done, in plain words.</param>
public sealed record FsrRefinement(IReadOnlyList<InstrumentScale> Instruments, IReadOnlyList<IntervalMatch> Intervals, int Rounds,
    double ReducedChiSquareBefore, double ReducedChiSquareAfter, IReadOnlyList<LineShift> LineShifts, IReadOnlyList<string> Warnings, IReadOnlyList<string> Notes)
{
    /// <summary>Largest line shift caused by the refinement, Hz.</summary>
    public double MaxLineShiftHz => LineShifts.Count == 0 ? 0 : LineShifts.Max(s => Math.Abs(s.ShiftHz));
}

/// <summary>One instrument's view of the lines: positions fitted to its sweeps alone.</summary>
/// <param name="Instrument">Instrument name.</param>
/// <param name="FrequencyHz">Line positions relative to the anchor line, in this instrument's frequency scale.</param>
/// <param name="Covariance">Covariance of those positions, Hz² (the anchor is fixed, so its row is zero).</param>
/// <param name="ReducedChiSquare">Fit quality.</param>
public sealed record InstrumentLineFit(string Instrument, double[] FrequencyHz, double[,] Covariance, double ReducedChiSquare);

/// <summary>
/// Refines the FSRs of the instruments. Each instrument's sweeps are fitted on their own with the lines of the
/// joint unfold as the starting point (positions, intensities, one offset, gain and background per sweep), so
/// every instrument gives the line positions in its own frequency scale. A wrong FSR stretches that scale: the
/// slope of one instrument's positions against the reference's is the FSR ratio correction (the Vernier
/// pattern). A known interval (RF sidebands at a stated frequency, a known splitting) between matched lines
/// fixes the absolute scale. The sweeps are then rescaled (axis and FSR together) and unfolded again; rounds
/// repeat until the correction no longer moves the farthest line by a fifth of a linewidth.
/// </summary>
public static class FsrRefiner
{
    /// <summary>
    /// Unfolds with refined FSRs: a scan of the folded peak positions first corrects FSR errors of up to
    /// <see cref="FsrRefineOptions.MaxScaleError"/> (with a known interval, each instrument on its own; without
    /// one, the ratio to the reference), so that the first unfold already sees consistent instruments; then
    /// rounds of per-instrument line fits polish the ratios and the absolute scale, each followed by an unfold.
    /// </summary>
    /// <param name="sweeps">Calibrated sweeps with the stated FSRs (their axes are in units of those FSRs).</param>
    /// <param name="unfoldOptions">Options of the unfolds.</param>
    /// <param name="options">What to refine.</param>
    /// <param name="progress">Progress messages.</param>
    public static (IReadOnlyList<CalibratedSweep> Sweeps, UnfoldResult Result, FsrRefinement Refinement) UnfoldWithRefinement(
        IReadOnlyList<CalibratedSweep> sweeps, UnfoldOptions? unfoldOptions, FsrRefineOptions options, IProgress<string>? progress = null)
    {
        unfoldOptions ??= new UnfoldOptions();
        var names = sweeps.Select(s => s.Instrument.Name).Distinct().ToList();
        var reference = options.ReferenceInstrument ?? names[0];
        var scan = Prescan(sweeps, unfoldOptions, options with { ReferenceInstrument = reference }, names.Count > 1 && options.RefineRatio);
        var current = sweeps.Select(s => Rescale(s, scan.Scales.GetValueOrDefault(s.Instrument.Name, 1.0))).ToList();
        progress?.Report("unfolding with the pre-scanned FSRs");
        var first = Unfolder.Run(current, unfoldOptions, progress);
        return Polish(sweeps, scan.Scales, scan.Basis, current, first, unfoldOptions, options, progress, scan.Notes, scan.Warnings);
    }

    /// <summary>Refines the FSRs from an unfold made with the stated FSRs and re-runs the unfold. The stated FSRs
    /// must already be close (the lines must come out of <paramref name="result"/>); otherwise use
    /// <see cref="UnfoldWithRefinement"/>.</summary>
    public static (IReadOnlyList<CalibratedSweep> Sweeps, UnfoldResult Result, FsrRefinement Refinement) RefineAndRerun(
        IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult result, UnfoldOptions? unfoldOptions, FsrRefineOptions options, IProgress<string>? progress = null) =>
        Polish(sweeps, new Dictionary<string, double>(), new Dictionary<string, string>(), sweeps, result, unfoldOptions ?? new UnfoldOptions(), options, progress, [], []);

    private static (IReadOnlyList<CalibratedSweep> Sweeps, UnfoldResult Result, FsrRefinement Refinement) Polish(
        IReadOnlyList<CalibratedSweep> sweeps, IReadOnlyDictionary<string, double> startScale, IReadOnlyDictionary<string, string> startBasis,
        IReadOnlyList<CalibratedSweep> current, UnfoldResult result, UnfoldOptions unfoldOptions, FsrRefineOptions options, IProgress<string>? progress,
        IEnumerable<string> startNotes, IEnumerable<string> startWarnings)
    {
        var names = sweeps.Select(s => s.Instrument.Name).Distinct().ToList();
        var nominal = names.ToDictionary(n => n, n => sweeps.First(s => s.Instrument.Name == n).Instrument.FsrHz);
        var reference = options.ReferenceInstrument ?? names[0];
        if (!names.Contains(reference)) throw new InputException($"reference instrument '{reference}' has no sweeps (instruments: {string.Join(", ", names)})");
        var warnings = startWarnings.ToList();
        var notes = startNotes.ToList();
        var scale = names.ToDictionary(n => n, n => startScale.GetValueOrDefault(n, 1.0));
        var relSigma = names.ToDictionary(n => n, _ => double.NaN);
        var basis = names.ToDictionary(n => n, n => startBasis.GetValueOrDefault(n, n == reference ? "reference (stated FSR)" : "stated FSR"));
        var currentResult = result;
        var first = result;
        var intervals = new List<IntervalMatch>();
        var rounds = 0;
        if (names.Count < 2 && options.KnownIntervalHz is null)
        {
            notes.Add("one instrument and no known interval: nothing to refine the FSR against");
            return (current, result, Finish());
        }

        var budget = new WorkBudget(int.MaxValue, options.CpuBudgetSeconds, progress);
        for (var round = 0; round < options.MaxRounds; round++)
        {
            var est = Estimate(current, currentResult, options with { ReferenceInstrument = reference }, names.Count > 1 && options.RefineRatio, budget);
            rounds = round + 1;
            if (budget.Exhausted is not null)
            {
                // a line fit cut short measures nothing reliable: this round's scales are not applied
                warnings.Add($"the FSR refinement stopped in round {round + 1} because {budget.Exhausted} (after {budget.CpuSeconds:F1} s); " +
                             (round == 0 ? "the FSRs were not refined beyond the pre-scan" : "the FSRs are those of the rounds before"));
                break;
            }

            if (round == 0)
            {
                warnings.AddRange(est.Warnings);
                notes.AddRange(est.Notes);
            }

            if (est.Scales.Count == 0) break;
            var farthest = currentResult.Lines.Count == 0 ? 0 : currentResult.Lines.Max(l => Math.Abs(l.FrequencyHz));
            var narrow = current.Min(s => s.Instrument.LinewidthHz);
            var biggest = est.Scales.Values.Max(v => Math.Abs(v.Scale - 1));
            foreach (var (n, v) in est.Scales)
            {
                scale[n] *= v.Scale;
                relSigma[n] = v.RelativeSigma;
                basis[n] = v.Basis;
            }

            if (est.Intervals.Count > 0) intervals = est.Intervals;
            if (biggest * farthest < 0.02 * narrow)
            {
                // the correction moves no line by a fiftieth of a linewidth: keep this unfold, carry the scales
                current = sweeps.Select(s => Rescale(s, scale[s.Instrument.Name])).ToList();
                break;
            }

            progress?.Report($"unfolding with refined FSRs (round {round + 1})");
            var previous = (current, currentResult, Scale: new Dictionary<string, double>(scale));
            foreach (var (n, v) in est.Scales) previous.Scale[n] /= v.Scale;
            current = sweeps.Select(s => Rescale(s, scale[s.Instrument.Name])).ToList();
            currentResult = Unfolder.Run(current, unfoldOptions, progress);
            // each round costs an unfold: a round that does not lower χ² is undone and ends the rounds, one that lowers it
            // by less than 2 % ends them (bounded cost; the next round would move the lines by less still)
            var before = previous.currentResult.Sweeps.Sum(f => f.ChiSquare);
            var after = currentResult.Sweeps.Sum(f => f.ChiSquare);
            if (after > before)
            {
                (current, currentResult) = (previous.current, previous.currentResult);
                foreach (var n in names) scale[n] = previous.Scale[n];
                notes.Add($"round {round + 1} of the FSR refinement raised χ² ({after:G6} > {before:G6}); it was undone and the rounds stopped");
                break;
            }

            if (after > 0.98 * before || biggest * farthest < 0.2 * narrow) break;
        }

        return (current, currentResult, Finish());

        FsrRefinement Finish()
        {
            var scales = names.Select(n => new InstrumentScale(n, nominal[n], nominal[n] * scale[n], nominal[n] * scale[n] * relSigma[n], scale[n] - 1, basis[n])).ToList();
            // where each line would sit on the reference's stated FSR scale
            var refScale = scale[reference];
            var shifts = currentResult.Lines.Select(l => new LineShift(l.FrequencyHz / refScale, l.FrequencyHz)).ToList();
            var matched = MeasuredIntervals(intervals, currentResult);
            foreach (var s in scales.Where(s => Math.Abs(s.RelativeChange) > 0.003))
                warnings.Add($"instrument '{s.Instrument}': the FSR refined from the data ({s.Basis}) is {Quantity.FormatFrequency(s.RefinedFsrHz, 7)}, {100 * s.RelativeChange:+0.000;-0.000} % from the stated {Quantity.FormatFrequency(s.NominalFsrHz, 7)}; update the setup");
            return new FsrRefinement(scales, matched, rounds, first.ReducedChiSquare, currentResult.ReducedChiSquare, shifts, warnings, notes);
        }
    }

    // ------------------------------------------------------------------ pre-scan of folded peaks

    private sealed record Feature(double U, double Height, int Count);

    internal sealed record PrescanResult(Dictionary<string, double> Scales, Dictionary<string, string> Basis, List<string> Notes, List<string> Warnings);

    /// <summary>
    /// Coarse FSR corrections from the folded peak positions of each instrument (relative to its strongest
    /// peak), before any unfold. With a known interval Δ, the partner of the strongest line at ±mΔ must sit at
    /// the folded position (±mΔ/s) mod FSR for the instrument's scale correction s; the candidates that agree
    /// give s. Without one, the ratio to the reference is scanned: at the right ratio every folded peak of
    /// either instrument is explained by some order of a peak of the other.
    /// </summary>
    internal static PrescanResult Prescan(IReadOnlyList<CalibratedSweep> sweeps, UnfoldOptions unfoldOptions, FsrRefineOptions options, bool ratio)
    {
        var names = sweeps.Select(s => s.Instrument.Name).Distinct().ToList();
        var reference = options.ReferenceInstrument ?? names[0];
        var scales = new Dictionary<string, double>();
        var basis = new Dictionary<string, string>();
        var notes = new List<string>();
        var warnings = new List<string>();
        var features = names.ToDictionary(n => n, n => Folded(sweeps.Where(s => s.Instrument.Name == n).ToList()));
        var inst = names.ToDictionary(n => n, n => sweeps.First(s => s.Instrument.Name == n).Instrument);

        if (options.KnownIntervalHz is double known)
        {
            foreach (var n in names)
            {
                var s = IntervalScale(features[n], inst[n], known, options);
                if (s is double v)
                {
                    scales[n] = v;
                    basis[n] = "known interval (folded peaks)";
                    notes.Add($"pre-scan: '{n}' sees the known interval {Quantity.FormatFrequency(known)} at a scale {(v - 1) * 100:+0.000;-0.000} % from its stated FSR");
                }
            }
        }

        if (ratio)
        {
            var window = Math.Max(Math.Abs(unfoldOptions.WindowStartHz ?? 0), Math.Abs(unfoldOptions.WindowEndHz ?? 0));
            if (!(window > 0)) window = DefaultReach(inst.Values.ToList());
            foreach (var n in names.Where(n => n != reference && !scales.ContainsKey(n)))
            {
                var refScale = scales.GetValueOrDefault(reference, 1.0);
                var eps = RatioScan(features[reference], inst[reference].FsrHz * refScale, features[n], inst[n], window, options.MaxScaleError, out var ambiguous);
                if (ambiguous)
                {
                    warnings.Add($"the FSR ratio of '{n}' to '{reference}' could not be pinned by the folded peaks alone (several ratios explain them); the stated FSRs were kept for the first unfold");
                    continue;
                }

                if (eps is double e && e != 0)
                {
                    scales[n] = refScale * (1 + e);
                    basis[n] = $"Vernier ratio to '{reference}' (folded peaks)";
                    notes.Add($"pre-scan: the folded peaks of '{n}' and '{reference}' agree best with '{n}' scaled by {e * 100:+0.000;-0.000} %");
                }
            }
        }

        return new PrescanResult(scales, basis, notes, warnings);
    }

    /// <summary>Peaks of an instrument's sweeps folded into one FSR, relative to the strongest, merged over repeats and sweeps.</summary>
    private static List<Feature> Folded(List<CalibratedSweep> group)
    {
        var inst = group[0].Instrument;
        var fsr = inst.FsrHz;
        var tol = 0.5 * inst.LinewidthHz;
        var raw = new List<(double U, double H)>();
        foreach (var s in group)
        {
            var idx = Enumerable.Range(0, s.Signal.Length).Select(i => (double)i).ToArray();
            var peaks = ResolvedPeaks.Find(idx, s.Signal, 0.03, 6);
            if (peaks.Count == 0) continue;
            var top = peaks.Max(p => p.Height);
            foreach (var p in peaks)
                raw.Add((SweepOperator.PositiveMod(PeakFinder.Interpolate(s.ScanHz, p.Position), fsr), p.Height / top));
        }

        if (raw.Count == 0) return [];
        raw.Sort((a, b) => a.U.CompareTo(b.U));
        var clusters = new List<List<(double U, double H)>>();
        foreach (var r in raw)
        {
            if (clusters.Count > 0 && r.U - clusters[^1][^1].U < tol) clusters[^1].Add(r);
            else clusters.Add([r]);
        }

        if (clusters.Count > 1 && clusters[0][0].U + fsr - clusters[^1][^1].U < tol)
        {
            clusters[0].AddRange(clusters[^1].Select(c => (c.U - fsr, c.H)));
            clusters.RemoveAt(clusters.Count - 1);
        }

        var list = clusters.Select(c => new Feature(c.Average(v => v.U), c.Average(v => v.H), c.Count)).ToList();
        var anchor = list.Where(f => f.Count >= 2).DefaultIfEmpty(list[0]).MaxBy(f => f.Height)!;
        return list.Select(f => f with { U = Wrap(f.U - anchor.U, fsr) }).OrderByDescending(f => f.Height).ToList();
    }

    /// <summary>Scale correction s of one instrument from where the partners of the strongest line fold to.</summary>
    private static double? IntervalScale(List<Feature> features, Instrument inst, double known, FsrRefineOptions options)
    {
        var fsr = inst.FsrHz;
        var tol = 0.5 * inst.LinewidthHz;
        var cands = new List<(double S, double W, int Key)>();
        for (var m = 1; m <= options.MaxIntervalMultiple; m++)
            foreach (var sign in new[] { -1, 1 })
            {
                var nu = sign * m * known;
                var reach = options.MaxScaleError * Math.Abs(nu) + 2 * tol;
                if (reach >= fsr / 2) continue; // the partner could fold anywhere: no information
                var predicted = Wrap(nu, fsr);
                foreach (var f in features)
                {
                    if (Math.Abs(f.U) < tol) continue; // the anchor itself
                    if (Math.Abs(Wrap(f.U - predicted, fsr)) > reach) continue;
                    var order = Math.Round((nu - f.U) / fsr);
                    var s = nu / (order * fsr + f.U);
                    cands.Add((s, f.Height * f.Count * nu * nu, sign * m));
                }
            }

        if (cands.Count == 0) return null;
        // the group of candidates that agree within the position tolerance, supported by the most distinct partners
        List<(double S, double W, int Key)> best = [];
        var bestScore = 0.0;
        foreach (var c in cands)
        {
            var group = cands.Where(o => Math.Abs(o.S - c.S) <= 2 * tol / known).ToList();
            var score = group.Select(g => g.Key).Distinct().Count() + 1e-3 * group.Sum(g => g.W) / cands.Sum(g => g.W);
            if (score > bestScore)
            {
                bestScore = score;
                best = group;
            }
        }

        if (best.Select(g => g.Key).Distinct().Count() < Math.Min(2, cands.Select(c => c.Key).Distinct().Count())) return null;
        return best.Sum(g => g.S * g.W) / best.Sum(g => g.W);
    }

    /// <summary>
    /// Scans the scale ε of instrument b against the reference a: at the right ε every folded peak of either is
    /// explained by some order (within the window) of a folded peak of the other. Returns the centre of the best
    /// plateau; <paramref name="ambiguous"/> when another plateau scores as well.
    /// </summary>
    private static double? RatioScan(List<Feature> a, double fsrA, List<Feature> b, Instrument instB, double window, double maxError, out bool ambiguous)
    {
        ambiguous = false;
        if (a.Count < 2 || b.Count < 2) return null;
        var tol = 0.5 * instB.LinewidthHz;
        var step = Math.Max(1e-6, 0.5 * tol / window);
        var count = (int)Math.Ceiling(maxError / step);
        var scores = new double[2 * count + 1];
        for (var k = -count; k <= count; k++)
        {
            var e = k * step;
            var fsrB = instB.FsrHz * (1 + e);
            scores[k + count] = Explained(a, fsrA, b.Select(f => f with { U = f.U * (1 + e) }).ToList(), fsrB, window, tol)
                                + Explained(b.Select(f => f with { U = f.U * (1 + e) }).ToList(), fsrB, a, fsrA, window, tol);
        }

        var max = scores.Max();
        // plateaus of the maximum score
        var plateaus = new List<(int Start, int End)>();
        for (var i = 0; i < scores.Length; i++)
        {
            if (scores[i] < max - 1e-9) continue;
            if (plateaus.Count > 0 && plateaus[^1].End == i - 1) plateaus[^1] = (plateaus[^1].Start, i);
            else plateaus.Add((i, i));
        }

        var zero = scores[count];
        if (zero >= max - 1e-9) return 0; // the stated ratio explains the peaks as well as any
        if (plateaus.Count > 1)
        {
            ambiguous = true;
            return null;
        }

        var p = plateaus[0];
        return (0.5 * (p.Start + p.End) - count) * step;
    }

    /// <summary>Weight of the features of x (heights) that some order of them, within the window, puts on a feature of y.</summary>
    private static double Explained(List<Feature> x, double fsrX, List<Feature> y, double fsrY, double window, double tol)
    {
        var total = 0.0;
        foreach (var f in x)
        {
            if (Math.Abs(f.U) < tol) continue; // the anchor is explained by construction
            var nMax = (int)Math.Ceiling(window / fsrX) + 1;
            var hit = false;
            for (var n = -nMax; n <= nMax && !hit; n++)
            {
                var nu = f.U + n * fsrX;
                if (Math.Abs(nu) > window) continue;
                var u = Wrap(nu, fsrY);
                foreach (var g in y)
                    if (Math.Abs(Wrap(g.U - u, fsrY)) <= tol)
                    {
                        hit = true;
                        break;
                    }
            }

            if (hit) total += Math.Sqrt(f.Height);
        }

        return total;
    }

    /// <summary>Half the beat range of the instruments, a default reach when no window is given.</summary>
    private static double DefaultReach(List<Instrument> instruments)
    {
        var f = instruments.Select(i => i.FsrHz).OrderBy(v => v).ToList();
        var reach = f[^1] * 4;
        for (var i = 1; i < f.Count; i++) reach = Math.Max(reach, Math.Min(0.5 * f[i] * f[i - 1] / Math.Max(1, f[i] - f[i - 1]), 50 * f[i]));
        return reach;
    }

    private static double Wrap(double v, double period)
    {
        var w = SweepOperator.PositiveMod(v, period);
        return w >= period / 2 ? w - period : w;
    }

    /// <summary>A sweep with its FSR and axis scaled by the same factor.</summary>
    public static CalibratedSweep Rescale(CalibratedSweep s, double factor) =>
        factor == 1 ? s : s with
        {
            Instrument = s.Instrument with { FsrHz = s.Instrument.FsrHz * factor },
            ScanHz = s.ScanHz.Select(v => v * factor).ToArray(),
            AxisUncertainty = s.AxisUncertainty?.Scaled(factor),
        };

    /// <summary>One round: per-instrument line fits, Vernier ratios and the known interval.</summary>
    internal sealed record Estimation(Dictionary<string, (double Scale, double RelativeSigma, string Basis)> Scales, List<IntervalMatch> Intervals,
        List<InstrumentLineFit> Fits, List<string> Warnings, List<string> Notes);

    internal static Estimation Estimate(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult result, FsrRefineOptions options, bool ratio,
        WorkBudget? budget = null)
    {
        var warnings = new List<string>();
        var notes = new List<string>();
        var scales = new Dictionary<string, (double, double, string)>();
        var narrow = sweeps.Min(s => s.Instrument.LinewidthHz);
        var lines = MergeLines(result.Lines.Where(l => l.Snr >= options.MinSnr).ToList(), 1.5 * narrow).OrderByDescending(l => l.Intensity).Take(options.MaxLines)
            .OrderBy(l => l.Frequency).ToList();
        if (lines.Count < 2)
        {
            warnings.Add($"FSR refinement needs at least two lines above SNR {options.MinSnr:F0}; found {lines.Count}: FSRs left as stated");
            return new Estimation([], [], [], warnings, notes);
        }

        var anchor = lines.IndexOf(lines.MaxBy(l => l.Intensity)!);
        var names = sweeps.Select(s => s.Instrument.Name).Distinct().ToList();
        var reference = options.ReferenceInstrument ?? names[0];
        var fits = names.Select(n => FitInstrument(sweeps.Where(s => s.Instrument.Name == n).ToList(), result, lines, anchor, budget)).ToList();
        var refFit = fits.First(f => f.Instrument == reference);

        // Vernier ratios: νᵏ = r·νʳᵉᶠ, both anchored at the same line
        var ratios = new Dictionary<string, (double R, double Sigma, int Used)>();
        ratios[reference] = (1, 0, lines.Count);
        if (ratio)
        {
            foreach (var f in fits.Where(f => f.Instrument != reference))
            {
                var r = 1.0;
                double sum = 0;
                var used = 0;
                for (var pass = 0; pass < 3; pass++)
                {
                    double swxy = 0, swxx = 0;
                    sum = 0;
                    used = 0;
                    for (var j = 0; j < lines.Count; j++)
                    {
                        if (j == anchor) continue;
                        var var = f.Covariance[j, j] + r * r * refFit.Covariance[j, j];
                        if (!(var > 0) || !double.IsFinite(var)) continue;
                        var w = 1 / var;
                        swxy += w * f.FrequencyHz[j] * refFit.FrequencyHz[j];
                        swxx += w * refFit.FrequencyHz[j] * refFit.FrequencyHz[j];
                        used++;
                    }

                    if (swxx > 0) r = swxy / swxx;
                    sum = swxx;
                }

                if (used == 0 || !(sum > 0))
                {
                    warnings.Add($"instrument '{f.Instrument}': no line could be measured well enough in both it and '{reference}' to refine the FSR ratio");
                    continue;
                }

                double chi = 0;
                for (var j = 0; j < lines.Count; j++)
                {
                    if (j == anchor) continue;
                    var var = f.Covariance[j, j] + r * r * refFit.Covariance[j, j];
                    if (!(var > 0) || !double.IsFinite(var)) continue;
                    chi += Math.Pow(f.FrequencyHz[j] - r * refFit.FrequencyHz[j], 2) / var;
                }

                var reduced = used > 1 ? chi / (used - 1) : 1;
                var sigma = Math.Sqrt(1 / sum) * Math.Sqrt(Math.Max(1, reduced));
                ratios[f.Instrument] = (r, sigma, used);
                if (used > 1 && reduced > 9)
                    warnings.Add($"instrument '{f.Instrument}': the line positions do not follow one FSR ratio against '{reference}' (χ²/dof {reduced:F1}); an axis calibration may be poor or a line misplaced");
                notes.Add($"FSR ratio {f.Instrument}/{reference} refined from {used} line(s): frequencies in '{f.Instrument}' were {(r - 1) * 100:+0.0000;-0.0000} % ± {sigma * 100:0.0000} % off against '{reference}'");
            }
        }

        // known interval: each instrument measures it in its own scale
        var intervals = new List<IntervalMatch>();
        var own = new Dictionary<string, (double Scale, double Rel)>();
        if (options.KnownIntervalHz is double known)
        {
            var pairs = MatchIntervals(lines, known, options, narrow);
            if (pairs.Count == 0)
            {
                warnings.Add($"no pair of lines is separated by the known interval {Quantity.FormatFrequency(known)} (or up to {options.MaxIntervalMultiple} times it) within {100 * options.IntervalTolerance:F1} %: the absolute FSR was not calibrated");
            }
            else
            {
                foreach (var f in fits)
                {
                    double sw = 0, swv = 0;
                    foreach (var (i, j, m) in pairs)
                    {
                        var d = f.FrequencyHz[j] - f.FrequencyHz[i];
                        var var = f.Covariance[i, i] + f.Covariance[j, j] - 2 * f.Covariance[i, j];
                        if (!(var > 0) || !double.IsFinite(var) || !(d > 0)) continue;
                        var rel = Math.Sqrt(var) / d;
                        sw += 1 / (rel * rel);
                        swv += m * known / d / (rel * rel);
                    }

                    if (sw > 0) own[f.Instrument] = (swv / sw, Math.Sqrt(1 / sw));
                }

                foreach (var (i, j, m) in pairs)
                {
                    var var = refFit.Covariance[i, i] + refFit.Covariance[j, j] - 2 * refFit.Covariance[i, j];
                    intervals.Add(new IntervalMatch(lines[i].Frequency, lines[j].Frequency, m, m * known, lines[j].Frequency - lines[i].Frequency,
                        double.IsFinite(var) ? Math.Sqrt(Math.Max(0, var)) : double.NaN));
                }

                if (own.Count == 0)
                    warnings.Add("the line pairs matched to the known interval could not be measured in any single instrument: the absolute FSR was not calibrated");
                else
                    notes.Add($"{pairs.Count} line pair(s) matched to the known interval {Quantity.FormatFrequency(known)} (or a multiple): " +
                              string.Join("; ", own.Select(o => $"'{o.Key}' scale {(o.Value.Scale - 1) * 100:+0.0000;-0.0000} % ± {o.Value.Rel * 100:0.0000} %")));
            }
        }

        if (ratio)
        {
            // one absolute scale for the reference, from every instrument's interval referred to it by its ratio
            double refScale = 1, refRel = 0;
            var absolute = false;
            double sw = 0, swv = 0;
            foreach (var (n, o) in own)
            {
                if (!ratios.TryGetValue(n, out var rr)) continue;
                var rel = Math.Sqrt(o.Rel * o.Rel + Math.Pow(rr.Sigma / rr.R, 2));
                sw += 1 / (rel * rel);
                swv += o.Scale * rr.R / (rel * rel);
            }

            if (sw > 0)
            {
                refScale = swv / sw;
                refRel = Math.Sqrt(1 / sw);
                absolute = true;
            }

            foreach (var n in names)
            {
                if (!ratios.TryGetValue(n, out var rr)) continue;
                var rel = Math.Sqrt(refRel * refRel + Math.Pow(rr.Sigma / rr.R, 2));
                var basis = n == reference
                    ? absolute ? "known interval" : "reference (stated FSR)"
                    : absolute ? "Vernier ratio and known interval" : $"Vernier ratio to '{reference}'";
                scales[n] = (refScale / rr.R, rel, basis);
            }
        }
        else if (own.Count > 0)
        {
            // each instrument on its own; one that cannot see an interval takes the others' mean scale
            var meanScale = own.Values.Sum(o => o.Scale / (o.Rel * o.Rel)) / own.Values.Sum(o => 1 / (o.Rel * o.Rel));
            foreach (var n in names)
            {
                if (own.TryGetValue(n, out var o)) scales[n] = (o.Scale, o.Rel, "known interval");
                else
                {
                    scales[n] = (meanScale, Math.Sqrt(1 / own.Values.Sum(v => 1 / (v.Rel * v.Rel))), "known interval (seen by other instruments)");
                    warnings.Add($"instrument '{n}' could not measure the known interval on its own; it takes the scale of the other instruments");
                }
            }
        }

        return new Estimation(scales, intervals, fits, warnings, notes);
    }

    private sealed record L(double Frequency, double Intensity);

    private static List<L> MergeLines(List<UnfoldedLine> lines, double distance)
    {
        var sorted = lines.OrderBy(l => l.FrequencyHz).ToList();
        var merged = new List<L>();
        foreach (var l in sorted)
        {
            if (merged.Count > 0 && l.FrequencyHz - merged[^1].Frequency < distance)
            {
                var m = merged[^1];
                var total = m.Intensity + l.Intensity;
                merged[^1] = new L((m.Frequency * m.Intensity + l.FrequencyHz * l.Intensity) / total, total);
            }
            else
            {
                merged.Add(new L(l.FrequencyHz, l.Intensity));
            }
        }

        return merged;
    }

    /// <summary>Pairs (i, j, multiple) with νⱼ − νᵢ close to multiple × interval, all implying one common scale.</summary>
    private static List<(int I, int J, int M)> MatchIntervals(List<L> lines, double known, FsrRefineOptions options, double linewidth)
    {
        var cands = new List<(int I, int J, int M, double S)>();
        for (var i = 0; i < lines.Count; i++)
            for (var j = i + 1; j < lines.Count; j++)
            {
                var d = lines[j].Frequency - lines[i].Frequency;
                for (var m = 1; m <= options.MaxIntervalMultiple; m++)
                {
                    var target = m * known;
                    if (Math.Abs(d - target) <= options.IntervalTolerance * target + 2 * linewidth) cands.Add((i, j, m, target / d));
                }
            }

        if (cands.Count == 0) return [];
        // keep the largest group of candidates that agree on the scale to within a linewidth over the interval
        var best = new List<(int, int, int)>();
        foreach (var c in cands)
        {
            var tol = 1.5 * linewidth / (c.M * known);
            var group = cands.Where(o => Math.Abs(o.S - c.S) <= tol).Select(o => (o.I, o.J, o.M)).ToList();
            if (group.Count > best.Count) best = group;
        }

        return best;
    }

    private static List<IntervalMatch> MeasuredIntervals(List<IntervalMatch> matched, UnfoldResult result)
    {
        if (matched.Count == 0 || result.Lines.Count == 0) return matched;
        return matched.Select(m =>
        {
            var lo = result.Lines.MinBy(l => Math.Abs(l.FrequencyHz - m.LowerHz))!.FrequencyHz;
            var hi = result.Lines.MinBy(l => Math.Abs(l.FrequencyHz - m.UpperHz))!.FrequencyHz;
            return m with { LowerHz = lo, UpperHz = hi, MeasuredHz = hi - lo };
        }).ToList();
    }

    /// <summary>
    /// Fits one instrument's sweeps alone: line positions (the anchor fixed) and intensities shared by its sweeps,
    /// and per sweep an offset, a gain (the first fixed) and a background.
    /// </summary>
    private static InstrumentLineFit FitInstrument(List<CalibratedSweep> group, UnfoldResult result, List<L> lines, int anchor, WorkBudget? budget)
    {
        var inst = group[0].Instrument;
        var fsr = inst.FsrHz;
        var k = Airy.CoefficientOfFinesse(inst.Finesse);
        var nLines = lines.Count;
        var nS = group.Count;
        // parameter layout: ν (all but the anchor) | a (all) | φ (all sweeps) | g (all but the first) | b (all sweeps)
        var nuIndex = new int[nLines];
        var idx = 0;
        for (var j = 0; j < nLines; j++) nuIndex[j] = j == anchor ? -1 : idx++;
        var aBase = idx;
        var phiBase = aBase + nLines;
        var gBase = phiBase + nS;
        var bBase = gBase + nS - 1;
        var nP = bBase + nS;
        var offsets = group.Select(s => result.Sweeps.FirstOrDefault(f => f.Name == s.Name)?.OffsetHz ?? 0).ToArray();

        // starting gains and backgrounds: linear regression of each sweep on the model with unit gain
        var p0 = new double[nP];
        for (var j = 0; j < nLines; j++)
        {
            if (nuIndex[j] >= 0) p0[nuIndex[j]] = lines[j].Frequency;
            p0[aBase + j] = lines[j].Intensity;
        }

        var g0 = new double[nS];
        for (var s = 0; s < nS; s++)
        {
            p0[phiBase + s] = offsets[s];
            var sw = group[s];
            var model = new double[sw.Signal.Length];
            for (var i = 0; i < model.Length; i++)
                for (var j = 0; j < nLines; j++)
                {
                    var sn = Math.Sin(Math.PI * (lines[j].Frequency - offsets[s] - sw.ScanHz[i]) / fsr);
                    model[i] += lines[j].Intensity / (1 + k * sn * sn);
                }

            var (g, b) = Regress(model, sw.Signal);
            g0[s] = g > 0 ? g : 1;
            p0[bBase + s] = b;
        }

        for (var j = 0; j < nLines; j++) p0[aBase + j] *= g0[0];
        for (var s = 1; s < nS; s++) p0[gBase + s - 1] = g0[s] / g0[0];

        var m = group.Sum(s => s.Signal.Length);
        var t = new double[nLines];
        var dt = new double[nLines];

        void Eval(double[] p, double[] r, double[,]? jac)
        {
            var row = 0;
            for (var s = 0; s < nS; s++)
            {
                var sw = group[s];
                var phi = p[phiBase + s];
                var g = s == 0 ? 1.0 : p[gBase + s - 1];
                var bg = p[bBase + s];
                var inv = 1 / sw.NoiseSigma;
                for (var i = 0; i < sw.Signal.Length; i++, row++)
                {
                    var sum = 0.0;
                    var dphi = 0.0;
                    for (var j = 0; j < nLines; j++)
                    {
                        var nu = nuIndex[j] >= 0 ? p[nuIndex[j]] : lines[j].Frequency;
                        var ph = Math.PI * (nu - phi - sw.ScanHz[i]) / fsr;
                        var sn = Math.Sin(ph);
                        var d = 1 + k * sn * sn;
                        t[j] = 1 / d;
                        dt[j] = -k * 2 * sn * Math.Cos(ph) * (Math.PI / fsr) / (d * d);
                        var a = p[aBase + j];
                        sum += a * t[j];
                        dphi -= a * dt[j];
                    }

                    r[row] = (sw.Signal[i] - (g * sum + bg)) * inv;
                    if (jac is null) continue;
                    for (var c = 0; c < nP; c++) jac[row, c] = 0;
                    for (var j = 0; j < nLines; j++)
                    {
                        if (nuIndex[j] >= 0) jac[row, nuIndex[j]] = g * p[aBase + j] * dt[j] * inv;
                        jac[row, aBase + j] = g * t[j] * inv;
                    }

                    jac[row, phiBase + s] = g * dphi * inv;
                    if (s > 0) jac[row, gBase + s - 1] = sum * inv;
                    jac[row, bBase + s] = inv;
                }
            }
        }

        // whitened residuals: steps that gain less than 0.01 in χ² five times in a row move no line by a meaningful
        // fraction of its uncertainty, so the fit ends there (common practice for a stopping rule, not from a reference)
        var fit = LevenbergMarquardt.MinimiseResiduals(Eval, p0, m, LmSettings.Relative(80, 1e-10) with { CrawlChiSquare = 0.01, Budget = budget });
        var covariance = fit.Covariance();
        var reduced = fit.ChiSquare / Math.Max(1, m - nP);
        var freq = new double[nLines];
        var cov = new double[nLines, nLines];
        var inflate = Math.Max(1, reduced);
        for (var j = 0; j < nLines; j++)
        {
            freq[j] = nuIndex[j] >= 0 ? fit.P[nuIndex[j]] : lines[j].Frequency;
            for (var j2 = 0; j2 < nLines; j2++)
            {
                if (nuIndex[j] < 0 || nuIndex[j2] < 0) continue;
                cov[j, j2] = covariance is null ? (j == j2 ? double.PositiveInfinity : 0) : covariance[nuIndex[j], nuIndex[j2]] * inflate;
            }

            // a line that ran far from where the joint unfold put it is not measured by this instrument
            if (Math.Abs(freq[j] - lines[j].Frequency) > 2 * inst.LinewidthHz) cov[j, j] = double.PositiveInfinity;
        }

        return new InstrumentLineFit(inst.Name, freq, cov, reduced);
    }

    private static (double Gain, double Background) Regress(double[] a, double[] y) =>
        GainFit.TryFit(a, y, out var g, out var b) ? (g, b) : (1, b);
}
