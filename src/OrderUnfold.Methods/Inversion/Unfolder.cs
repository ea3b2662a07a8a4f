using OrderUnfold.Calibration;
using OrderUnfold.Instruments;

namespace OrderUnfold.Inversion;

/// <summary>
/// Solves for the spectrum from calibrated sweeps of one or more cavities: finds each sweep's frequency
/// origin, fits gains and backgrounds, runs L1-weighted NNLS on one grid for all sweeps at once, and
/// turns the solution into lines relative to the strongest one.
/// </summary>
public static class Unfolder
{
    /// <summary>
    /// Unfolds <paramref name="sweeps"/> in named stages: the checks of the input (<see cref="CheckSweeps"/>), the grid and
    /// its memory estimate (<see cref="LayOutGrid"/>), the first gains (<see cref="InitialGains"/>), the sweep origins
    /// (<see cref="OffsetSearch"/>), the joint solve with its gain and offset rounds (<see cref="JointSolve"/>), the fit of
    /// each sweep (<see cref="FitSweeps"/>) and the lines relative to the strongest (<see cref="AnchorLines"/>). A cancelled
    /// <paramref name="cancellationToken"/> stops it between stages and inside the NNLS solves (<see cref="OperationCanceledException"/>).
    /// </summary>
    public static UnfoldResult Run(IReadOnlyList<CalibratedSweep> sweeps, UnfoldOptions? options = null, IProgress<string>? progress = null,
        CancellationToken cancellationToken = default)
    {
        options ??= new UnfoldOptions();
        cancellationToken.ThrowIfCancellationRequested();
        CheckSweeps(sweeps);
        var warnings = new List<string>();
        var layout = LayOutGrid(sweeps, options);
        if (layout.Warning is { } single) warnings.Add(single);
        progress?.Report($"grid of {layout.Grid.Count} bins; estimated memory {UnfoldMemory.Format(layout.MemoryBytes)}");

        var gains = InitialGains(sweeps, options.Thresholds);
        // origins of the sweeps, coarse to fine (OffsetSearch): the cross-correlation of folded profiles scores every
        // origin at once, pair solves on a bounded sub-window check the best few
        progress?.Report("finding sweep offsets");
        var search = OffsetSearch.Run(sweeps, gains, layout.Grid, layout.StepHz, options, progress, cancellationToken);

        progress?.Report("solving NNLS on all sweeps");
        var joint = JointSolve.Run(sweeps, layout, search.OffsetsHz, gains, options, progress, cancellationToken);
        var nnls = joint.Nnls;
        if (nnls.Status != SolverStatus.Converged) warnings.Add($"NNLS did not converge: {nnls.Message} (KKT violation {nnls.KktViolation:G3})");
        if (joint.StoppedUnexplained is { } stopped) warnings.Add(stopped);

        var fits = FitSweeps(sweeps, joint, options.Thresholds, warnings);
        var spectrum = nnls.Solution[..layout.Grid.Count];
        var anchored = AnchorLines(ExtractLines(joint.Problem, spectrum, options.MinSnr), layout.Grid, options.Thresholds, warnings);
        return new UnfoldResult
        {
            Grid = new FrequencyGrid(layout.Grid.StartHz - anchored.AnchorHz, layout.Grid.StepHz, layout.Grid.Count),
            Spectrum = spectrum.Select(v => v / anchored.Scale).ToArray(),
            Lines = anchored.Lines,
            Sweeps = fits.Fits.Select(f => f with { OffsetHz = f.OffsetHz - anchored.AnchorHz }).ToList(),
            Solver = nnls,
            L1Weight = joint.Problem.L1Weight,
            OrdersResolved = layout.OrdersResolved,
            UnambiguousRangeHz = layout.UnambiguousHz,
            OffsetTrials = search.Trials.Select(t => t with { OffsetHz = t.OffsetHz - anchored.AnchorHz }).ToList(),
            Warnings = warnings,
            ReducedChiSquare = fits.ChiSquare / Math.Max(1, fits.Samples - nnls.ActiveCount - 2 * sweeps.Count),
        };
    }

    /// <summary>Refuses sweeps that cannot be unfolded: fewer than two samples, less than one FSR, or a constant signal.</summary>
    private static void CheckSweeps(IReadOnlyList<CalibratedSweep> sweeps)
    {
        if (sweeps.Count == 0) throw new InputException("no sweeps to unfold");
        foreach (var s in sweeps)
        {
            if (s.ScanHz.Length != s.Signal.Length) throw new ArgumentException($"{s.Name}: scan and signal lengths differ");
            if (s.Signal.Length < 2) throw new InputException($"the sweep has {s.Signal.Length} sample(s); at least two are needed", s.Name);
            var span = Math.Abs(s.ScanHz[^1] - s.ScanHz[0]);
            if (span < s.Instrument.FsrHz)
                throw new InputException($"sweep covers {span / s.Instrument.FsrHz:F2} FSR of '{s.Instrument.Name}'; it must cover at least one full FSR ({Units.Quantity.FormatFrequency(s.Instrument.FsrHz)}) to be unfolded", s.Name);
            if (!(s.NoiseSigma > 0)) throw new InputException("the signal is constant (no noise or signal level could be measured)", s.Name);
        }
    }

    /// <summary>
    /// The grid of the unfold: its step (given, or the narrowest linewidth over <see cref="UnfoldThresholds.GridBinsPerLinewidth"/>),
    /// its window (given, or the unambiguous range of the instruments; one FSR for one instrument) and the memory the
    /// unfold will need, which must stay under <see cref="UnfoldOptions.MaxMemoryBytes"/>.
    /// </summary>
    internal static GridLayout LayOutGrid(IReadOnlyList<CalibratedSweep> sweeps, UnfoldOptions options)
    {
        var thresholds = options.Thresholds;
        var instruments = sweeps.Select(s => s.Instrument).DistinctBy(i => i.FsrHz).ToList();
        var narrowest = sweeps.Min(s => s.Instrument.LinewidthHz);
        var step = options.GridStepHz ?? narrowest / thresholds.GridBinsPerLinewidth;
        var ordersResolved = instruments.Count > 1;
        var unambiguous = ordersResolved
            ? AliasMargin.FirstAlias(instruments, options.AliasThresholdLinewidths, options.MaxGridBins * step)
            : instruments[0].FsrHz;
        var start = options.WindowStartHz ?? -unambiguous / 2;
        var end = options.WindowEndHz ?? unambiguous / 2;
        string? warning = null;
        if (!ordersResolved)
        {
            if (end - start > unambiguous) end = start + unambiguous - step;
            warning = $"only one instrument (FSR {Units.Quantity.FormatFrequency(unambiguous)}): the spectrum is folded into one FSR and the orders of the lines are unknown";
        }

        if (!(end > start))
            throw new InputException($"the frequency window is empty ({Units.Quantity.FormatFrequency(start)} to {Units.Quantity.FormatFrequency(end)}); check window in [solve]");
        // the size limit follows the memory the unfold needs, estimated and stated before solving; the bin count is a
        // double first, so that a tiny grid_step over a wide window is refused rather than overflowing an int
        var binsNeeded = Math.Ceiling((end - start) / step) + 1;
        var memory = UnfoldMemory.EstimateUnfoldBytes((long)Math.Min(binsNeeded, 1e15), sweeps.Sum(s => (long)s.Signal.Length));
        if (!(binsNeeded < int.MaxValue / 4) || memory > options.MaxMemoryBytes)
            throw new InputException(
                $"grid_step {Units.Quantity.FormatFrequency(step)} over the window {Units.Quantity.FormatFrequency(start)} to {Units.Quantity.FormatFrequency(end)} needs {binsNeeded:G4} grid bins; " +
                $"an unfold of this size needs about {UnfoldMemory.Format(memory)} of memory, more than the limit of {UnfoldMemory.Format(options.MaxMemoryBytes)}: " +
                "enlarge grid_step or narrow window in [solve], or raise max_memory_gb in [solve]");
        var periodicStep = Math.Min(step / thresholds.PeriodicStepsPerGridStep, narrowest / thresholds.PeriodicStepsPerLinewidth);
        return new GridLayout(FrequencyGrid.Covering(start, end, step), step, periodicStep, ordersResolved, unambiguous, memory, warning);
    }

    /// <summary>First gains from the sweep means, relative to the first sweep: the mean Airy transmission over whole FSRs is
    /// Tmax/√(1+F), so the level above the baseline times √(1+F) estimates the gain.</summary>
    internal static double[] InitialGains(IReadOnlyList<CalibratedSweep> sweeps, UnfoldThresholds thresholds)
    {
        var gains = new double[sweeps.Count];
        for (var k = 0; k < sweeps.Count; k++)
        {
            var y = sweeps[k].Signal;
            var level = y.Average() - PeakFinder.Percentile(y, thresholds.BaselineQuantile);
            gains[k] = Math.Max(level, 1e-300) * Math.Sqrt(1 + Airy.CoefficientOfFinesse(sweeps[k].Instrument.Finesse));
        }

        var g0 = gains[0];
        for (var k = 0; k < gains.Length; k++) gains[k] /= g0;
        return gains;
    }

    /// <summary>Each sweep's fit with the joint solution (χ², reduced χ², residual RMS, model); a sweep the model fits
    /// poorly (reduced χ² above <see cref="UnfoldThresholds.PoorFitReducedChiSquare"/>) is named in a warning.</summary>
    private static SweepFits FitSweeps(IReadOnlyList<CalibratedSweep> sweeps, JointSolution joint, UnfoldThresholds thresholds, List<string> warnings)
    {
        var nnls = joint.Nnls;
        var gridCount = joint.Problem.Grid.Count;
        var models = joint.Problem.Model(nnls.Solution);
        var fits = new List<SweepFit>();
        double chiTotal = 0;
        var samples = 0;
        for (var k = 0; k < sweeps.Count; k++)
        {
            var y = sweeps[k].Signal;
            var m = models[k];
            var chi = SweepChiSquare(y, m, sweeps[k].NoiseSigma);
            double ss = 0;
            for (var i = 0; i < y.Length; i++) ss += (y[i] - m[i]) * (y[i] - m[i]);

            var dof = SweepDegreesOfFreedom(y.Length, nnls.ActiveCount, sweeps.Count);
            chiTotal += chi;
            samples += y.Length;
            fits.Add(new SweepFit(sweeps[k].Name, sweeps[k].Instrument.Name, joint.OffsetsHz[k], joint.Gains[k],
                nnls.Solution[gridCount + k] * sweeps[k].NoiseSigma, sweeps[k].NoiseSigma, chi, chi / dof, Math.Sqrt(ss / y.Length), y.Length) { Model = m });
            if (chi / dof > thresholds.PoorFitReducedChiSquare)
                warnings.Add($"{sweeps[k].Name}: the model does not fit well (reduced χ² = {chi / dof:F2}); check the axis calibration, the finesse and the offsets");
        }

        return new SweepFits(fits, chiTotal, samples);
    }

    /// <summary>One sweep's χ²: Σ((y − model)/σ)².</summary>
    internal static double SweepChiSquare(double[] y, double[] model, double sigma)
    {
        var s2 = sigma * sigma;
        double chi = 0;
        for (var i = 0; i < y.Length; i++)
        {
            var r = y[i] - model[i];
            chi += r * r / s2;
        }

        return chi;
    }

    /// <summary>Degrees of freedom of one sweep's fit: its samples less its gain and background and its share of the active
    /// grid bins.</summary>
    internal static int SweepDegreesOfFreedom(int samples, int activeCount, int sweepCount) => Math.Max(1, samples - 2 - activeCount / sweepCount);

    /// <summary>The lines relative to the strongest (the anchor: frequency 0, intensity 1), in frequency order; lines at the
    /// window's edge and an empty line list are named in warnings.</summary>
    private static AnchoredLines AnchorLines(List<UnfoldedLine> lines, FrequencyGrid grid, UnfoldThresholds thresholds, List<string> warnings)
    {
        var anchorHz = 0.0;
        var scale = 1.0;
        if (lines.Count > 0)
        {
            var strongest = lines.MaxBy(l => l.RawIntensity)!;
            anchorHz = strongest.FrequencyHz;
            scale = strongest.RawIntensity;
        }

        var anchored = lines.Select(l => l with { FrequencyHz = l.FrequencyHz - anchorHz, Intensity = l.RawIntensity / scale })
            .OrderBy(l => l.FrequencyHz).ToList();
        foreach (var l in anchored)
        {
            if (l.FirstBin < thresholds.EdgeBins || l.LastBin >= grid.Count - thresholds.EdgeBins)
                warnings.Add($"line at {Units.Quantity.FormatFrequency(l.FrequencyHz)} sits at the edge of the frequency window; it may belong outside it");
        }

        if (lines.Count == 0) warnings.Add("no line above the detection threshold was found");
        return new AnchoredLines(anchored, anchorHz, scale);
    }

    /// <summary>The grid stage's result.</summary>
    /// <param name="Grid">Grid of the unfold (not yet relative to the anchor).</param>
    /// <param name="StepHz">Grid step, Hz.</param>
    /// <param name="PeriodicStepHz">Step of the sweep operators' periodic response table, Hz.</param>
    /// <param name="OrdersResolved">True with two or more instruments of different FSR.</param>
    /// <param name="UnambiguousHz">The instruments' unambiguous range (one FSR for one instrument), Hz.</param>
    /// <param name="MemoryBytes">Estimated memory of the unfold.</param>
    /// <param name="Warning">The single-instrument warning, when there is one instrument.</param>
    internal sealed record GridLayout(FrequencyGrid Grid, double StepHz, double PeriodicStepHz, bool OrdersResolved, double UnambiguousHz, long MemoryBytes, string? Warning);

    private sealed record SweepFits(List<SweepFit> Fits, double ChiSquare, int Samples);

    private sealed record AnchoredLines(List<UnfoldedLine> Lines, double AnchorHz, double Scale);

    /// <summary>Folded positions (Hz within one FSR) of a sweep's peaks, strongest first, merged across repeats.</summary>
    public static List<double> FoldedPeaks(CalibratedSweep sweep)
    {
        var idx = Enumerable.Range(0, sweep.Signal.Length).Select(i => (double)i).ToArray();
        var peaks = PeakFinder.Find(idx, sweep.Signal, minHeightFraction: 0.05, minSnr: 5);
        var fsr = sweep.Instrument.FsrHz;
        var lw = sweep.Instrument.LinewidthHz;
        var list = new List<(double u, double h)>();
        foreach (var p in peaks.OrderByDescending(p => p.Height))
        {
            var f = PeakFinder.Interpolate(sweep.ScanHz, p.Position);
            var u = SweepOperator.PositiveMod(f, fsr);
            var dup = list.Any(q =>
            {
                var d = Math.Abs(q.u - u);
                return Math.Min(d, fsr - d) < 2 * lw;
            });
            if (!dup) list.Add((u, p.Height));
        }

        return list.Select(q => q.u).ToList();
    }

    /// <summary>The weighted problem: the L1 and smoothness weights are set from the median squared column norm of the
    /// unweighted one (<see cref="UnfoldOptions.Sparsity"/>, <see cref="UnfoldOptions.Smoothness"/>).</summary>
    public static UnfoldProblem BuildProblem(IReadOnlyList<CalibratedSweep> sweeps, FrequencyGrid grid, IReadOnlyList<double> offsets,
        IReadOnlyList<double> gains, UnfoldOptions options, double periodicStep)
    {
        // first pass without penalties to measure the typical column norm, then the weighted problem
        var probe = new UnfoldProblem(sweeps, grid, offsets, gains, 0, 0, periodicStep);
        var norms = new List<double>();
        var count = Math.Min(options.Thresholds.Solve.ColumnNormProbes, grid.Count);
        for (var i = 0; i < count; i++)
        {
            var j = (int)((long)i * (grid.Count - 1) / Math.Max(1, count - 1));
            norms.Add(probe.ColumnNormSquared(j));
        }

        var median = Medians.Upper(norms);
        var lambda = options.Sparsity * Math.Sqrt(median);
        var mu = options.Smoothness * median;
        return probe.WithPenalties(lambda, mu);
    }

    /// <summary>The active-set solver's tolerance and iteration cap for <paramref name="problem"/> (see
    /// <see cref="GridSolveThresholds.MaxIterations"/> for why the cap).</summary>
    public static ActiveSetNnls.Options SolverOptions(UnfoldProblem problem, UnfoldThresholds? thresholds = null)
    {
        thresholds ??= new UnfoldThresholds();
        var tol = Math.Max(thresholds.Solve.ToleranceRelative * problem.L1Weight, thresholds.Solve.ToleranceFloor);
        var iterations = Math.Min(thresholds.Solve.MaxIterations, Math.Max(thresholds.Solve.MinIterations, problem.Grid.Count / thresholds.Solve.BinsPerIteration));
        return new ActiveSetNnls.Options { Tolerance = tol, MaxIterations = iterations };
    }

    /// <summary>Σ((y − model)/σ)² over all sweeps of <paramref name="problem"/> at <paramref name="solution"/>.</summary>
    public static double ChiSquare(UnfoldProblem problem, double[] solution, IReadOnlyList<CalibratedSweep> sweeps)
    {
        var models = problem.Model(solution);
        double chi = 0;
        for (var k = 0; k < sweeps.Count; k++)
        {
            var y = sweeps[k].Signal;
            var s2 = sweeps[k].NoiseSigma * sweeps[k].NoiseSigma;
            for (var i = 0; i < y.Length; i++)
            {
                var r = y[i] - models[k][i];
                chi += r * r / s2;
            }
        }

        return chi;
    }

    private static List<UnfoldedLine> ExtractLines(UnfoldProblem problem, double[] s, double minSnr)
    {
        var grid = problem.Grid;
        var max = s.Length > 0 ? s.Max() : 0;
        var lines = new List<UnfoldedLine>();
        if (!(max > 0)) return lines;
        var j = 0;
        while (j < s.Length)
        {
            if (s[j] <= 0)
            {
                j++;
                continue;
            }

            var first = j;
            var last = j;
            while (true)
            {
                if (last + 1 < s.Length && s[last + 1] > 0) last++;
                else if (last + 2 < s.Length && s[last + 2] > 0) last += 2; // bridge one empty bin
                else break;
            }

            double sum = 0, sumF = 0, norm = 0;
            for (var k = first; k <= last; k++)
            {
                sum += s[k];
                sumF += s[k] * grid[k];
            }

            var top = first;
            for (var k = first; k <= last; k++) if (s[k] > s[top]) top = k;
            norm = Math.Sqrt(problem.ColumnNormSquared(top));
            var snr = sum * norm;
            if (snr >= minSnr) lines.Add(new UnfoldedLine(sumF / sum, 0, sum, snr, first, last));
            j = last + 1;
        }

        return lines;
    }
}
