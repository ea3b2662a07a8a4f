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
    public static UnfoldResult Run(IReadOnlyList<CalibratedSweep> sweeps, UnfoldOptions? options = null, IProgress<string>? progress = null)
    {
        options ??= new UnfoldOptions();
        if (sweeps.Count == 0) throw new InputException("no sweeps to unfold");
        var warnings = new List<string>();
        foreach (var s in sweeps)
        {
            if (s.ScanHz.Length != s.Signal.Length) throw new ArgumentException($"{s.Name}: scan and signal lengths differ");
            if (s.Signal.Length < 2) throw new InputException($"the sweep has {s.Signal.Length} sample(s); at least two are needed", s.Name);
            var span = Math.Abs(s.ScanHz[^1] - s.ScanHz[0]);
            if (span < s.Instrument.FsrHz)
                throw new InputException($"sweep covers {span / s.Instrument.FsrHz:F2} FSR of '{s.Instrument.Name}'; it must cover at least one full FSR ({Units.Quantity.FormatFrequency(s.Instrument.FsrHz)}) to be unfolded", s.Name);
            if (!(s.NoiseSigma > 0)) throw new InputException("the signal is constant (no noise or signal level could be measured)", s.Name);
        }

        var instruments = sweeps.Select(s => s.Instrument).DistinctBy(i => i.FsrHz).ToList();
        var narrowest = sweeps.Min(s => s.Instrument.LinewidthHz);
        var step = options.GridStepHz ?? narrowest / 4;
        var ordersResolved = instruments.Count > 1;
        double unambiguous;
        double start, end;
        if (ordersResolved)
        {
            unambiguous = AliasMargin.FirstAlias(instruments, options.AliasThresholdLinewidths, options.MaxGridBins * step);
            start = options.WindowStartHz ?? -unambiguous / 2;
            end = options.WindowEndHz ?? unambiguous / 2;
        }
        else
        {
            unambiguous = instruments[0].FsrHz;
            start = options.WindowStartHz ?? -unambiguous / 2;
            end = options.WindowEndHz ?? unambiguous / 2;
            if (end - start > unambiguous) end = start + unambiguous - step;
            warnings.Add($"only one instrument (FSR {Units.Quantity.FormatFrequency(unambiguous)}): the spectrum is folded into one FSR and the orders of the lines are unknown");
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
        var grid = FrequencyGrid.Covering(start, end, step);
        progress?.Report($"grid of {grid.Count} bins; estimated memory {UnfoldMemory.Format(memory)}");
        var periodicStep = Math.Min(step / 2, narrowest / 20);

        // initial gains from the sweep means: the mean Airy transmission over whole FSRs is Tmax/√(1+F)
        var gains = new double[sweeps.Count];
        for (var k = 0; k < sweeps.Count; k++)
        {
            var y = sweeps[k].Signal;
            var level = y.Average() - PeakFinder.Percentile(y, 0.02);
            gains[k] = Math.Max(level, 1e-300) * Math.Sqrt(1 + Airy.CoefficientOfFinesse(sweeps[k].Instrument.Finesse));
        }

        var g0 = gains[0];
        for (var k = 0; k < gains.Length; k++) gains[k] /= g0;

        // origins of the sweeps, coarse to fine (OffsetSearch): the cross-correlation of folded profiles scores every
        // origin at once, pair solves on a bounded sub-window check the best few
        progress?.Report("finding sweep offsets");
        var search = OffsetSearch.Run(sweeps, gains, grid, step, options, progress);
        var offsets = search.OffsetsHz;
        var trials = search.Trials;

        // joint solve: alternate NNLS (warm-started) with Gauss–Newton offset steps and gain refits
        progress?.Report("solving NNLS on all sweeps");
        UnfoldProblem problem = null!;
        NnlsResult nnls = null!;
        // one sweep has no relative gain or offset to refine: a single solve is the answer
        var rounds = sweeps.Count == 1 ? 0 : Math.Max(1, options.GainRounds);
        (double Lambda, double Mu, double[] Gains)? jointWeights = null;
        for (var round = 0; round <= rounds; round++)
        {
            // the L1 and smoothness weights are set once from the first round's column norms, rescaled when gains move
            if (jointWeights is (double l0, double mu0, double[] g0s))
            {
                var ratio = Math.Sqrt(gains.Zip(g0s, (g, h) => (g / h) * (g / h)).Average());
                problem = new UnfoldProblem(sweeps, grid, offsets, gains, l0 * ratio, mu0 * ratio * ratio, periodicStep);
            }
            else
            {
                problem = BuildProblem(sweeps, grid, offsets, gains, options, periodicStep);
                jointWeights = (problem.L1Weight, problem.SmoothnessWeight, gains.ToArray());
            }

            nnls = NnlsSolver.Solve(problem, options.Solver, SolverOptions(problem), problem.L1Weight, problem.SmoothnessWeight,
                round == 0 ? default : nnls.Solution);
            progress?.Report($"NNLS round {round + 1}: {nnls.ActiveCount} active entries after {nnls.Iterations} iterations ({nnls.Status})");
            if (round == rounds) break;
            var s = nnls.Solution.AsSpan(0, grid.Count);
            var moved = 0.0;
            for (var k = 1; k < sweeps.Count; k++)
            {
                var lw = sweeps[k].Instrument.LinewidthHz;
                var d = Math.Clamp(problem.OffsetStep(k, nnls.Solution), -lw / 2, lw / 2);
                offsets[k] += d;
                moved = Math.Max(moved, Math.Abs(d) / lw);
            }

            var newGains = new double[sweeps.Count];
            for (var k = 0; k < sweeps.Count; k++)
            {
                var a = problem.ForwardUnscaled(k, s);
                newGains[k] = RegressGain(a, sweeps[k].Signal, gains[k]);
            }

            var n0 = newGains[0];
            var gainChange = 0.0;
            for (var k = 0; k < gains.Length; k++)
            {
                var g = newGains[k] / n0;
                gainChange = Math.Max(gainChange, Math.Abs(g / gains[k] - 1));
                gains[k] = g;
            }

            if (moved < 0.005 && gainChange < 0.002) rounds = round + 1;
        }

        if (nnls.Status != SolverStatus.Converged) warnings.Add($"NNLS did not converge: {nnls.Message} (KKT violation {nnls.KktViolation:G3})");

        // sweep fits
        var models = problem.Model(nnls.Solution);
        var fits = new List<SweepFit>();
        double chiTotal = 0;
        var samples = 0;
        for (var k = 0; k < sweeps.Count; k++)
        {
            var y = sweeps[k].Signal;
            var m = models[k];
            double chi = 0, ss = 0;
            for (var i = 0; i < y.Length; i++)
            {
                var r = y[i] - m[i];
                ss += r * r;
                chi += r * r / (sweeps[k].NoiseSigma * sweeps[k].NoiseSigma);
            }

            var dof = Math.Max(1, y.Length - 2 - nnls.ActiveCount / sweeps.Count);
            chiTotal += chi;
            samples += y.Length;
            fits.Add(new SweepFit(sweeps[k].Name, sweeps[k].Instrument.Name, offsets[k], gains[k],
                nnls.Solution[grid.Count + k] * sweeps[k].NoiseSigma, sweeps[k].NoiseSigma, chi, chi / dof, Math.Sqrt(ss / y.Length), y.Length) { Model = m });
            if (chi / dof > 3)
                warnings.Add($"{sweeps[k].Name}: the model does not fit well (reduced χ² = {chi / dof:F2}); check the axis calibration, the finesse and the offsets");
        }

        // lines
        var spectrum = nnls.Solution[..grid.Count];
        var lines = ExtractLines(problem, spectrum, options.MinSnr);
        var anchorHz = 0.0;
        var scale = 1.0;
        if (lines.Count > 0)
        {
            var strongest = lines.MaxBy(l => l.RawIntensity)!;
            anchorHz = strongest.FrequencyHz;
            scale = strongest.RawIntensity;
        }

        var shiftedGrid = new FrequencyGrid(grid.StartHz - anchorHz, grid.StepHz, grid.Count);
        var finalLines = lines.Select(l => l with { FrequencyHz = l.FrequencyHz - anchorHz, Intensity = l.RawIntensity / scale })
            .OrderBy(l => l.FrequencyHz).ToList();
        foreach (var l in finalLines)
        {
            if (l.FirstBin <= 1 || l.LastBin >= grid.Count - 2)
                warnings.Add($"line at {Units.Quantity.FormatFrequency(l.FrequencyHz)} sits at the edge of the frequency window; it may belong outside it");
        }

        if (lines.Count == 0) warnings.Add("no line above the detection threshold was found");
        var fitsShifted = fits.Select(f => f with { OffsetHz = f.OffsetHz - anchorHz }).ToList();
        return new UnfoldResult
        {
            Grid = shiftedGrid,
            Spectrum = spectrum.Select(v => v / scale).ToArray(),
            Lines = finalLines,
            Sweeps = fitsShifted,
            Solver = nnls,
            L1Weight = problem.L1Weight,
            OrdersResolved = ordersResolved,
            UnambiguousRangeHz = unambiguous,
            OffsetTrials = trials.Select(t => t with { OffsetHz = t.OffsetHz - anchorHz }).ToList(),
            Warnings = warnings,
            ReducedChiSquare = chiTotal / Math.Max(1, samples - nnls.ActiveCount - 2 * sweeps.Count),
        };
    }

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

    public static UnfoldProblem BuildProblem(IReadOnlyList<CalibratedSweep> sweeps, FrequencyGrid grid, IReadOnlyList<double> offsets,
        IReadOnlyList<double> gains, UnfoldOptions options, double periodicStep)
    {
        // first pass without penalties to measure the typical column norm, then the weighted problem
        var probe = new UnfoldProblem(sweeps, grid, offsets, gains, 0, 0, periodicStep);
        var norms = new List<double>();
        var count = Math.Min(33, grid.Count);
        for (var i = 0; i < count; i++)
        {
            var j = (int)((long)i * (grid.Count - 1) / Math.Max(1, count - 1));
            norms.Add(probe.ColumnNormSquared(j));
        }

        norms.Sort();
        var median = norms[norms.Count / 2];
        var lambda = options.Sparsity * Math.Sqrt(median);
        var mu = options.Smoothness * median;
        return probe.WithPenalties(lambda, mu);
    }

    public static ActiveSetNnls.Options SolverOptions(UnfoldProblem problem)
    {
        var tol = Math.Max(1e-3 * problem.L1Weight, 1e-9);
        // The active set of a line spectrum stays far below this; a model that does not fit the data (wrong axis, wrong
        // instrument) keeps adding bins, and this bound keeps the cost finite: the result then says it did not converge.
        return new ActiveSetNnls.Options { Tolerance = tol, MaxIterations = Math.Min(2500, Math.Max(500, problem.Grid.Count / 4)) };
    }

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

    private static double RegressGain(double[] a, double[] y, double fallback) =>
        GainFit.TryFit(a, y, out var g, out _) && g > 0 && double.IsFinite(g) ? g : fallback;

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
