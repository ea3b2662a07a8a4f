using MathNet.Numerics.LinearAlgebra;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Units;

namespace OrderUnfold.Analysis;

/// <summary>Options of <see cref="LineRefiner"/>.</summary>
public sealed record RefineOptions
{
    /// <summary>Fit an intrinsic Lorentzian width per line (convolved with the Airy profile).</summary>
    public bool FitWidths { get; init; }

    /// <summary>Residual-bootstrap replicates (0: none).</summary>
    public int Bootstrap { get; init; }

    /// <summary>Seed of the bootstrap resampling.</summary>
    public int Seed { get; init; } = 1;

    /// <summary>Minimum signal-to-noise ratio (intensity / its standard error) for a line to be kept.</summary>
    public double MinSnr { get; init; } = 5;

    /// <summary>Δχ² to the best alternative placement below which a line's order is called doubtful.</summary>
    public double DoubtfulDeltaChiSquare { get; init; } = 25;

    /// <summary>Alternative placements (near-aliases) tried per line.</summary>
    public int AliasCandidates { get; init; } = 4;

    /// <summary>Maximum Levenberg–Marquardt iterations of one fit.</summary>
    public int MaxIterations { get; init; } = 200;

    /// <summary>Iterations allowed to the whole refinement (every fit round, the order check's quick refits and full
    /// refits, the bootstrap replicates, counted together; default 3000). When it is used up the refinement stops with a
    /// warning: lines not yet refined keep their grid values with widened uncertainties, checks not yet made are marked
    /// as not made.</summary>
    public int IterationBudget { get; init; } = 3000;

    /// <summary>CPU seconds (of the calling thread) allowed to the whole refinement; ≤ 0 or infinity: no
    /// limit (default 8 s). Reached, it stops the refinement like <see cref="IterationBudget"/>. Results that hit it depend on the
    /// machine's speed, and the warning says so.</summary>
    public double CpuBudgetSeconds { get; init; } = 8;

    /// <summary>Lines within this many linewidths (folded into each instrument's FSR) of a sample enter that sample's row of
    /// the Gauss–Newton matrix (default 6; the model and the gradient always use every line). Lines farther apart than
    /// twice this in every instrument fit as independent blocks. Infinity: the dense matrix.</summary>
    public double JacobianCutoffLinewidths { get; init; } = 6;

    /// <summary>Two refined lines closer than this many linewidths (of the narrowest instrument) are merged into one.</summary>
    public double MergeLinewidths { get; init; } = 0.5;

    /// <summary>A refined line that ends farther than this many linewidths (of the widest instrument) outside its grid
    /// cluster is pinned at its grid position (its position is not refined and gets no uncertainty).</summary>
    public double WanderLinewidths { get; init; } = 2;
}

/// <summary>How sure the tool is that a line sits in the order given.</summary>
public enum OrderVerdict
{
    /// <summary>Every alternative placement tried fits clearly worse (Δχ² above the threshold).</summary>
    Secure,

    /// <summary>An alternative placement fits almost as well.</summary>
    Doubtful,

    /// <summary>One instrument only, or no refinement: orders are not determined.</summary>
    Unknown,

    /// <summary>Orders are resolved but the line was not refined, so no alternative placement was tried.</summary>
    Unchecked,
}

/// <summary>Diagnostics of one refinement.</summary>
/// <param name="Converged">True when Levenberg–Marquardt stopped on a convergence criterion.</param>
/// <param name="ExitReason">Why Levenberg–Marquardt stopped, as text.</param>
/// <param name="Iterations">Iterations used (last fit).</param>
/// <param name="ChiSquare">χ² at the solution.</param>
/// <param name="ReducedChiSquare">χ² per degree of freedom.</param>
/// <param name="DetectionThresholdDeltaChiSquare">Δχ² a line must add to be kept (from MinSnr and the BIC penalty).</param>
/// <param name="Dropped">Grid clusters dropped as not significant after refinement.</param>
public sealed record RefinementDiagnostics(bool Converged, string ExitReason, int Iterations, double ChiSquare, double ReducedChiSquare,
    double DetectionThresholdDeltaChiSquare, int Dropped)
{
    /// <summary>Pairs of lines merged because they ended closer than <see cref="RefineOptions.MergeLinewidths"/>.</summary>
    public int Merged { get; init; }

    /// <summary>Lines whose position was pinned at the grid value because the refinement moved them away from their cluster.</summary>
    public int Pinned { get; init; }

    /// <summary>True when the refinement failed as a whole and the grid result was kept.</summary>
    public bool FellBackToGrid { get; init; }

    /// <summary>Iterations spent by the whole refinement (all fits, order check and bootstrap; see
    /// <see cref="RefineOptions.IterationBudget"/>).</summary>
    public int IterationsUsed { get; init; }

    /// <summary>The iteration budget the refinement ran with.</summary>
    public int IterationBudget { get; init; }

    /// <summary>CPU seconds the refinement used (calling thread).</summary>
    public double CpuSeconds { get; init; }

    /// <summary>Null when the refinement finished within its budget; otherwise which budget ran out and in which stage.</summary>
    public string? BudgetExhausted { get; init; }

    /// <summary>Independent line groups of the last fit (lines sharing no sample within the Jacobian cutoff).</summary>
    public int Groups { get; init; }

    /// <summary>
    /// Range over which the order of the weakest kept line is unambiguous for these instruments and this noise: the
    /// smallest shift Δ (beyond the line's own peak) at which a copy of that line moved by Δ would fit within the
    /// doubtful Δχ² threshold (estimated from each sweep's sample density, see <see cref="LineRefiner.AliasChiSquareEstimate"/>).
    /// Null when not computed.
    /// </summary>
    public double? UnambiguousRangeHz { get; init; }

    /// <summary>True when no confusable shift was found up to <see cref="UnambiguousRangeHz"/> (the range is at least that).</summary>
    public bool UnambiguousRangeIsLowerBound { get; init; }

    /// <summary>Relative intensity (to the anchor) of the line <see cref="UnambiguousRangeHz"/> was computed for.</summary>
    public double? UnambiguousForIntensity { get; init; }

    /// <summary>One sentence stating the unambiguous range for these instruments and this noise.</summary>
    public string? UnambiguousStatement { get; init; }
}

/// <summary>
/// Off-grid refinement of the lines of an NNLS grid solution against the raw sweeps: positions, intensities
/// (optionally intrinsic widths), per-sweep offsets, gains and backgrounds fitted jointly by Levenberg–Marquardt
/// (<see cref="LevenbergMarquardt"/>, on the normal equations). Gives standard errors (covariance scaled by the reduced χ²), the Cramér–Rao bound
/// (the unscaled covariance at the solution), optional residual-bootstrap errors, significance-based pruning,
/// a detection-limit curve, and for each line Δχ² to its best alternative placement (order confidence).
/// </summary>
/// <remarks>
/// Failure handling: a fit that does not converge, gives non-finite values or raises χ² keeps the grid result with
/// a note on every line; a line that wanders off its grid cluster is pinned at its grid position; two lines that end
/// closer than <see cref="RefineOptions.MergeLinewidths"/> are merged; a line whose parameters lie in the null space
/// of a singular Fisher matrix gets no uncertainty and a note. No reported number is NaN: missing values are null.
/// </remarks>
public static class LineRefiner
{
    /// <summary>Refines <paramref name="grid"/>'s lines against <paramref name="sweeps"/> (the same sweeps, in the same
    /// order, that produced the grid result). Progress lines go to <paramref name="progress"/> at least about once a
    /// second of wall time while fits run.</summary>
    public static (UnfoldResult Result, RefinementDiagnostics Diagnostics) Refine(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, RefineOptions? options = null,
        IProgress<string>? progress = null)
    {
        ArgumentNullException.ThrowIfNull(sweeps);
        ArgumentNullException.ThrowIfNull(grid);
        options ??= new RefineOptions();
        if (sweeps.Count == 0) throw new ArgumentException("no sweeps to refine against", nameof(sweeps));
        if (sweeps.Count != grid.Sweeps.Count)
            throw new ArgumentException($"the grid result has {grid.Sweeps.Count} sweep fits but {sweeps.Count} sweeps were given", nameof(grid));

        var budget = new WorkBudget(options.IterationBudget, options.CpuBudgetSeconds, progress);
        var data = new Data(sweeps) { CutoffLinewidths = options.JacobianCutoffLinewidths };
        var threshold = Threshold(options, data.M);
        var warnings = grid.Warnings.ToList();
        if (grid.Lines.Count == 0)
        {
            var chi0 = grid.Sweeps.Sum(s => s.ChiSquare);
            return (grid with { DetectionLimit = DetectionLimit(sweeps, grid, threshold, 1.0) },
                new RefinementDiagnostics(true, "no lines", 0, chi0, grid.ReducedChiSquare, threshold, 0) { IterationBudget = options.IterationBudget });
        }

        var lwNarrow = sweeps.Min(s => s.Instrument.LinewidthHz);
        var lwWide = sweeps.Max(s => s.Instrument.LinewidthHz);
        var tracked = new List<Tracked>();
        var layout = new Layout(grid.Lines.Count, sweeps.Count, options.FitWidths);
        var p = layout.Initial(grid.Lines, grid.Sweeps, lwNarrow);
        for (var j = 0; j < grid.Lines.Count; j++)
        {
            var l = grid.Lines[j];
            var halfCluster = 0.5 * (l.LastBin - l.FirstBin) * grid.Grid.StepHz;
            tracked.Add(new Tracked(l, p[layout.Nu(j)], p[layout.A(j)], halfCluster + options.WanderLinewidths * lwWide));
        }

        // fit, then pin wanderers, merge collapsed pairs and prune insignificant lines: one change per independent line
        // group per round (groups share no sample within the Jacobian cutoff, so a change in one cannot alter the other's
        // verdict beyond the shared sweep parameters)
        FitResult? fit = null;
        string? failure = null;
        int dropped = 0, merged = 0, pinned = 0, rounds = 0;
        var maxRounds = 4 * grid.Lines.Count + 8;
        for (var round = 0; round < maxRounds && layout.Lines > 0; round++)
        {
            rounds = round + 1;
            budget.Report($"refinement round {round + 1}: fitting {layout.Lines} line(s)", force: true);
            var mask = layout.FixedMask(tracked);
            var chiBefore = data.ChiSquare(layout, p);
            fit = Fit(data, layout, p, options, mask, budget: budget, label: $"refinement round {round + 1}");
            if (fit.Reason == BudgetReason)
            {
                failure = $"{budget.Exhausted} in fit round {round + 1} ({layout.Lines} line(s) still in the fit)";
                break;
            }

            if (!fit.P.All(double.IsFinite) || !double.IsFinite(fit.ChiSquare))
            {
                failure = $"the fit produced non-finite values ({fit.Reason})";
                break;
            }

            if (fit.ChiSquare > chiBefore * (1 + 1e-6) + 1e-9)
            {
                failure = $"the fit ended with a larger χ² than it started from ({fit.ChiSquare:G6} > {chiBefore:G6})";
                break;
            }

            // a fit stopped by its iteration limit still improved χ²: pinning, merging and pruning below often remove the
            // cause (an undetermined line); when nothing is left to change, it counts as failed (no retries: the grid
            // result is kept with widened uncertainties)
            p = fit.P;
            var groups = data.Groups(layout, p);
            var changed = new HashSet<int>();
            var remove = new List<int>();

            // 1. a line that left its grid cluster: pin its position at the grid value
            for (var j = 0; j < layout.Lines; j++)
            {
                if (tracked[j].Pinned || changed.Contains(groups[j]) || Math.Abs(p[layout.Nu(j)] - tracked[j].GridNu) <= tracked[j].Tolerance) continue;
                var t = tracked[j];
                t.Pinned = true;
                t.Notes.Add($"the refinement moved this line by {Quantity.FormatFrequency(p[layout.Nu(j)] - t.GridNu, 3)}, out of its grid cluster: position kept at the grid value (no frequency uncertainty)");
                p[layout.Nu(j)] = t.GridNu;
                p[layout.A(j)] = t.GridA;
                pinned++;
                changed.Add(groups[j]);
            }

            // 2. two lines that collapsed onto each other (always one group): merge them
            foreach (var (i1, i2, sep) in ClosestPairs(layout, p, groups))
            {
                if (changed.Contains(groups[i1]) || sep >= options.MergeLinewidths * lwNarrow) continue;
                var (keep, lose) = p[layout.A(i1)] >= p[layout.A(i2)] ? (i1, i2) : (i2, i1);
                double ak = p[layout.A(keep)], al = p[layout.A(lose)];
                if (ak > 0 && al > 0) p[layout.Nu(keep)] = (ak * p[layout.Nu(keep)] + al * p[layout.Nu(lose)]) / (ak + al);
                p[layout.A(keep)] = Math.Max(ak, 0) + Math.Max(al, 0);
                if (layout.Widths) p[layout.W(keep)] = Math.Max(Math.Abs(p[layout.W(keep)]), Math.Abs(p[layout.W(lose)]));
                var tk = tracked[keep];
                var tl = tracked[lose];
                tk.Notes.Add($"merged with a second line {Quantity.FormatFrequency(sep, 3)} away (closer than {options.MergeLinewidths:G3} linewidth): the two cannot be told apart");
                tk.Notes.AddRange(tl.Notes);
                tk.FirstBin = Math.Min(tk.FirstBin, tl.FirstBin);
                tk.LastBin = Math.Max(tk.LastBin, tl.LastBin);
                tk.Pinned &= tl.Pinned;
                remove.Add(lose);
                merged++;
                changed.Add(groups[i1]);
            }

            // 3. the weakest line of a group below the detection threshold (Wald test with the χ²-scaled covariance): drop it
            //    (with, in the same round, every other line of that group far below it — z² under a quarter of the
            //    threshold — so that a grid that absorbed a mismatch with dozens of weak lines is pruned in a few rounds,
            //    not one line per round; backward elimination in steps, common practice)
            foreach (var weakest in WeakestInsignificant(layout, fit, threshold, groups))
            {
                if (changed.Contains(groups[weakest])) continue;
                remove.Add(weakest);
                dropped++;
                foreach (var j in Enumerable.Range(0, layout.Lines).Where(j => j != weakest && groups[j] == groups[weakest] && FarBelow(layout, fit, threshold, j)))
                {
                    remove.Add(j);
                    dropped++;
                }

                changed.Add(groups[weakest]);
            }

            if (changed.Count > 0)
            {
                foreach (var j in remove.Distinct().OrderByDescending(j => j))
                {
                    (layout, p) = layout.Without(j, p);
                    tracked.RemoveAt(j);
                }

                fit = null;
                continue;
            }

            if (!fit.Converged) failure = $"Levenberg–Marquardt did not converge ({fit.Reason} after {fit.Iterations} iterations)";
            break;
        }

        if (failure is null && fit is null && layout.Lines > 0) failure = $"the refinement did not settle within its round limit ({maxRounds} rounds)";
        if (failure is not null) return FallBack(sweeps, grid, threshold, warnings, failure, fit, budget, options);
        if (layout.Lines == 0) return NoLineLeft(data, sweeps, grid, threshold, warnings, dropped, merged, budget, options);
        return Finish(data, sweeps, grid, options, threshold, warnings, layout, fit!, tracked, dropped, merged, pinned, budget);
    }

    /// <summary>Per line group, the line with the smallest Wald statistic z = a/σ_a (χ²-scaled covariance) when z² is below
    /// the threshold or a ≤ 0. Lines whose σ_a is undetermined are never chosen.</summary>
    private static IEnumerable<int> WeakestInsignificant(Layout layout, FitResult fit, double threshold, int[] groups)
    {
        foreach (var members in Enumerable.Range(0, layout.Lines).GroupBy(j => groups[j]))
        {
            var weakest = WeakestInsignificant(layout, fit, threshold, members);
            if (weakest >= 0) yield return weakest;
        }
    }

    /// <summary>True when line j's Wald statistic is far below the detection threshold (z² under a quarter of it, or a ≤ 0).</summary>
    private static bool FarBelow(Layout layout, FitResult fit, double threshold, int j)
    {
        var a = fit.P[layout.A(j)];
        var va = fit.Scaled[layout.A(j), layout.A(j)];
        if (a <= 0) return true;
        if (!(double.IsFinite(va) && va > 0)) return false;
        return a * a / va < threshold / 4;
    }

    /// <summary>Pairs of lines of one group, each group's closest pair only, with their separation.</summary>
    private static IEnumerable<(int, int, double)> ClosestPairs(Layout layout, double[] p, int[] groups)
    {
        foreach (var members in Enumerable.Range(0, layout.Lines).GroupBy(j => groups[j]))
        {
            var m = members.ToArray();
            (int, int, double)? best = null;
            for (var a = 0; a < m.Length; a++)
            for (var b = a + 1; b < m.Length; b++)
            {
                var d = Math.Abs(p[layout.Nu(m[a])] - p[layout.Nu(m[b])]);
                if (best is null || d < best.Value.Item3) best = (m[a], m[b], d);
            }

            if (best is not null) yield return best.Value;
        }
    }

    /// <summary>The line with the smallest Wald statistic z = a/σ_a (χ²-scaled covariance) when z² is below the threshold
    /// or a ≤ 0; −1 when every line is significant. Lines whose σ_a is undetermined are never chosen.</summary>
    private static int WeakestInsignificant(Layout layout, FitResult fit, double threshold, IEnumerable<int> members)
    {
        var weakest = -1;
        var zMin = double.PositiveInfinity;
        foreach (var j in members)
        {
            var a = fit.P[layout.A(j)];
            var va = fit.Scaled[layout.A(j), layout.A(j)];
            var z = a <= 0 ? double.NegativeInfinity : double.IsFinite(va) && va > 0 ? a / Math.Sqrt(va) : double.NaN;
            if (double.IsNaN(z)) continue; // undetermined: kept, with a note
            if (z < zMin)
            {
                zMin = z;
                weakest = j;
            }
        }

        return weakest >= 0 && (zMin <= 0 || zMin * zMin < threshold) ? weakest : -1;
    }

    /// <summary>
    /// The grid-stage SNR down to which clusters should be handed to the refinement when it decides with
    /// <paramref name="minSnr"/>: MinSnr − sparsity, at least 1. The L1 weight λ = sparsity·σ·‖c‖ shrinks a cluster's
    /// amplitude by about λ/‖c‖², i.e. its grid SNR (amplitude × ‖c‖/σ) by about the sparsity, so a line of SNR 7 shows
    /// about 4 on the grid; the refinement refits it without the penalty and keeps it only if it passes its own test.
    /// Measured (simulated, one cavity, 20 seeds): a line of refined SNR ≈ 7 reached the refinement 3 times in 20 with
    /// the grid threshold at MinSnr = 5, 20 in 20 with this one, and no extra line appeared.
    /// </summary>
    public static double CandidateMinSnr(double minSnr, double sparsity) => Math.Max(1, minSnr - Math.Max(0, sparsity));

    /// <summary>Δχ² a line must add: the larger of MinSnr² and the BIC penalty for two parameters, 2·ln(m).</summary>
    public static double Threshold(RefineOptions options, int samples) => Math.Max(options.MinSnr * options.MinSnr, 2 * Math.Log(Math.Max(2, samples)));

    // ---------------------------------------------------------------- assembling the result

    public sealed class Tracked(UnfoldedLine grid, double gridNu, double gridA, double tolerance)
    {
        public UnfoldedLine Grid { get; } = grid;
        public double GridNu { get; } = gridNu;
        public double GridA { get; } = gridA;
        public double Tolerance { get; } = tolerance;
        public bool Pinned { get; set; }
        public int FirstBin { get; set; } = grid.FirstBin;
        public int LastBin { get; set; } = grid.LastBin;
        public List<string> Notes { get; } = [];
    }

    /// <summary>
    /// The grid result, kept when the refinement failed or ran out of budget: every line keeps its grid position and
    /// intensity, its order is not judged, and it gets a frequency uncertainty that bounds the grid's own error rather
    /// than a fitted one — the larger of half its grid cluster and half the widest linewidth, combined with the anchor's
    /// (the grid cannot place a line better than its cluster, and a cluster narrower than a linewidth still leaves the
    /// peak's position within the linewidth's core). The note on each line and a warning say so.
    /// </summary>
    private static (UnfoldResult, RefinementDiagnostics) FallBack(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, double threshold,
        List<string> warnings, string failure, FitResult? fit, WorkBudget budget, RefineOptions options)
    {
        var lwWide = sweeps.Max(s => s.Instrument.LinewidthHz);
        double Bound(UnfoldedLine l) => Math.Max(0.5 * (l.LastBin - l.FirstBin) * grid.Grid.StepHz, 0.5 * lwWide);
        // the grid handed the refinement candidates down to CandidateMinSnr for its significance test to judge; unjudged,
        // only those at the report's own threshold are lines (the strongest always stays: it anchors the frequencies)
        var top = grid.Lines.MaxBy(l => l.RawIntensity)!;
        var candidates = grid.Lines.Count;
        grid = grid with { Lines = grid.Lines.Where(l => ReferenceEquals(l, top) || l.Snr >= options.MinSnr).ToList() };
        if (grid.Lines.Count < candidates)
            warnings.Add($"{candidates - grid.Lines.Count} weaker grid candidate(s) below min_snr {options.MinSnr:G3} that the refinement did not get to judge are left out");
        var anchor = top;
        var anchorBound = Bound(anchor);
        warnings.Add($"line refinement stopped ({failure}); the {grid.Lines.Count} grid line(s) are reported unrefined, with frequency uncertainties widened to half their grid cluster or half a linewidth ({Quantity.FormatFrequency(0.5 * lwWide, 3)}), whichever is larger, and orders not judged"
                     + (budget.Exhausted?.Contains("CPU") == true ? "; the CPU-time budget depends on the machine's speed: a faster or idle machine may finish" : ""));
        var scale = grid.Lines.Max(l => l.RawIntensity);
        var result = grid with
        {
            Lines = grid.Lines.Select(l =>
            {
                var own = Bound(l);
                var sigma = ReferenceEquals(l, anchor) ? 0 : Math.Sqrt(own * own + anchorBound * anchorBound);
                return l with
                {
                    Note = $"refinement failed: {failure}; grid value kept, frequency uncertainty ±{Quantity.FormatFrequency(sigma, 2)} is a bound from the grid cluster and the linewidth, not a fitted error",
                    Verdict = OrderVerdict.Unknown,
                    FrequencySigmaHz = sigma,
                };
            }).ToList(),
            DetectionLimit = DetectionLimit(sweeps, grid, threshold, scale),
            Warnings = warnings,
            Refined = false,
        };
        var chi = grid.Sweeps.Sum(s => s.ChiSquare);
        var diag = new RefinementDiagnostics(false, fit?.Reason ?? "failed", fit?.Iterations ?? 0, chi, grid.ReducedChiSquare, threshold, 0)
        {
            FellBackToGrid = true,
            IterationsUsed = budget.Used,
            IterationBudget = options.IterationBudget,
            CpuSeconds = budget.CpuSeconds,
            BudgetExhausted = budget.Exhausted,
        };
        return (result, diag);
    }

    /// <summary>Every grid cluster was insignificant: no line, flat backgrounds, detection limit relative to the strongest grid cluster.</summary>
    private static (UnfoldResult, RefinementDiagnostics) NoLineLeft(Data data, IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, double threshold,
        List<string> warnings, int dropped, int merged, WorkBudget budget, RefineOptions options)
    {
        warnings.Add($"no line is significant after refinement: all {grid.Lines.Count} grid cluster(s) fell below the detection threshold (Δχ² {threshold:G3}); intensities and the detection limit are relative to the strongest grid cluster");
        var fits = new List<SweepFit>();
        double chiTotal = 0;
        for (var k = 0; k < sweeps.Count; k++)
        {
            var (start, count) = data.Range(k);
            var mean = 0.0;
            for (var i = 0; i < count; i++) mean += data.Y[start + i];
            mean /= count;
            double chi = 0, ss = 0;
            for (var i = 0; i < count; i++)
            {
                var r = data.Y[start + i] - mean;
                ss += r * r;
                chi += r * r * data.W[start + i];
            }

            chiTotal += chi;
            fits.Add(grid.Sweeps[k] with
            {
                Background = mean, ChiSquare = chi, ReducedChiSquare = chi / Math.Max(1, count - 1), ResidualRms = Math.Sqrt(ss / count),
                Model = Enumerable.Repeat(mean, count).ToArray(),
            });
        }

        var scale = grid.Lines.Max(l => l.RawIntensity);
        var red = chiTotal / Math.Max(1, data.M - sweeps.Count);
        var result = grid with
        {
            Lines = [],
            Sweeps = fits,
            DetectionLimit = DetectionLimit(sweeps, grid, threshold, scale),
            Warnings = warnings,
            ReducedChiSquare = red,
            Refined = true,
        };
        return (result, new RefinementDiagnostics(true, "no significant line", 0, chiTotal, red, threshold, dropped)
        {
            Merged = merged, IterationsUsed = budget.Used, IterationBudget = options.IterationBudget, CpuSeconds = budget.CpuSeconds,
        });
    }

    private static (UnfoldResult, RefinementDiagnostics) Finish(Data data, IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, RefineOptions options,
        double threshold, List<string> warnings, Layout layout, FitResult fit, List<Tracked> tracked, int dropped, int merged, int pinned, WorkBudget budget)
    {
        var lwWide = sweeps.Max(s => s.Instrument.LinewidthHz);
        var anchor = Enumerable.Range(0, layout.Lines).MaxBy(j => fit.P[layout.A(j)]);
        var anchorHz = fit.P[layout.Nu(anchor)];
        var aAnchor = fit.P[layout.A(anchor)];
        var ordersResolved = grid.OrdersResolved;

        // order confidence first (it decides what is reported), then the bootstrap, both within the budget
        var aliases = new (double Shift, double DeltaChi)?[layout.Lines];
        string? orderStop = null;
        if (ordersResolved)
        {
            var instruments = sweeps.Select(s => s.Instrument).DistinctBy(i => i.FsrHz).ToList();
            var origin = grid.Sweeps[0].OffsetHz + anchorHz; // old relative frequency − origin = new relative frequency
            var window = (grid.Grid.StartHz - origin, grid.Grid.EndHz - origin);
            var mask = layout.FixedMask(tracked);
            for (var j = 0; j < layout.Lines; j++)
            {
                budget.Report($"order check: line {j + 1} of {layout.Lines}");
                if (budget.Exhausted is not null) break;
                aliases[j] = BestAlias(data, layout, fit, j, instruments, window, anchorHz, options, mask, budget);
                if (budget.Exhausted is not null) aliases[j] = null; // cut short: not a complete check
            }

            if (budget.Exhausted is not null)
            {
                orderStop = budget.Exhausted;
                warnings.Add($"the order check stopped: {orderStop}; {aliases.Count(a => a is null)} of {layout.Lines} line(s) have no order verdict (marked unknown)");
            }
        }

        double[]? bootstrap = null;
        if (options.Bootstrap > 0)
        {
            budget.Report("bootstrap", force: true);
            var (sigmas, done) = BootstrapSigmas(data, layout, fit, anchor, options, layout.FixedMask(tracked), budget);
            bootstrap = sigmas;
            if (done < options.Bootstrap)
                warnings.Add(bootstrap is null
                    ? $"the bootstrap stopped after {done} of {options.Bootstrap} replicates ({budget.Exhausted}); too few for an error estimate, none is reported"
                    : $"the bootstrap stopped after {done} of {options.Bootstrap} replicates ({budget.Exhausted}); its errors rest on those");
        }

        var red = fit.ChiSquare / Math.Max(1, data.M - layout.FreeCount(layout.FixedMask(tracked)));
        var refined = new List<UnfoldedLine>();
        var cs = fit.Scaled;
        var cu = fit.Unscaled;
        var axisCov = AxisCovariance(data, layout, fit);
        for (var j = 0; j < layout.Lines; j++)
        {
            var t = tracked[j];
            var note = new List<string>(t.Notes);
            var nu = fit.P[layout.Nu(j)] - anchorHz;
            var a = fit.P[layout.A(j)];
            int nj = layout.Nu(j), na = layout.Nu(anchor), aj = layout.A(j), aa = layout.A(anchor);
            static double VarDiff(Matrix<double> c, int i1, int i2) => c[i1, i1] + c[i2, i2] - 2 * c[i1, i2];
            double? sigNu = j == anchor ? 0 : Finite(Math.Sqrt(VarDiff(cs, nj, na)));
            double? crbNu = j == anchor ? 0 : Finite(Math.Sqrt(VarDiff(cu, nj, na)));
            if (t.Pinned) sigNu = crbNu = null;
            var rel = a / aAnchor;
            var varRel = j == anchor ? 0 : rel * rel * (cs[aj, aj] / (a * a) + cs[aa, aa] / (aAnchor * aAnchor) - 2 * cs[aj, aa] / (a * aAnchor));
            var snr = Finite(a / Math.Sqrt(cs[aj, aj]));
            if (!t.Pinned && (sigNu is null || snr is null || (j != anchor && !double.IsFinite(varRel))))
                note.Add("singular covariance: this line's parameters are not all determined by the data, so some uncertainties are missing");
            if (t.Pinned && j == anchor) note.Add("the anchor's position is pinned, so the other lines' frequency uncertainties leave out the anchor's");

            double? bootSigma = bootstrap is null ? null : Finite(bootstrap[j]);
            var reportedSigma = sigNu;
            if (bootSigma is double bs && sigNu is double sc && j != anchor && !t.Pinned && (bs > 1.43 * sc || bs < 0.7 * sc))
            {
                reportedSigma = bs;
                note.Add($"covariance and bootstrap errors disagree ({Quantity.FormatFrequency(sc, 2)} vs {Quantity.FormatFrequency(bs, 2)}): bootstrap used");
            }

            // the calibrated axes' own uncertainty, combined with the statistical one
            double? axisSigma = axisCov is null || t.Pinned ? null : j == anchor ? 0 : Finite(Math.Sqrt(Math.Max(0, VarDiff(axisCov, nj, na))));
            if (reportedSigma is double rs && axisSigma is double ax) reportedSigma = Math.Sqrt(rs * rs + ax * ax);

            // a neighbour closer than a linewidth (but not merged): strongly correlated parameters
            for (var i = 0; i < layout.Lines; i++)
            {
                if (i == j) continue;
                var d = Math.Abs(fit.P[layout.Nu(i)] - fit.P[layout.Nu(j)]);
                if (d < lwWide)
                {
                    note.Add($"another line lies {Quantity.FormatFrequency(d, 3)} away (less than a linewidth): the two positions and intensities are strongly correlated");
                    break;
                }
            }

            double? width = options.FitWidths ? Math.Abs(fit.P[layout.W(j)]) : null;
            double? widthSigma = options.FitWidths ? Finite(Math.Sqrt(cs[layout.W(j), layout.W(j)])) : null;
            refined.Add(new UnfoldedLine(nu, rel, a, snr ?? t.Grid.Snr, t.FirstBin, t.LastBin)
            {
                FrequencySigmaHz = reportedSigma,
                FrequencyAxisSigmaHz = axisSigma,
                FrequencyCrbHz = crbNu,
                IntensitySigma2 = Finite(Math.Sqrt(varRel)),
                BootstrapSigmaHz = bootSigma,
                WidthHz = width,
                WidthSigmaHz = widthSigma,
                Verdict = ordersResolved ? OrderVerdict.Secure : OrderVerdict.Unknown,
                Note = note.Count > 0 ? string.Join("; ", note) : null,
            });
        }

        // order confidence: Δχ² of the best alternative placement of each line
        if (ordersResolved)
        {
            for (var j = 0; j < refined.Count; j++)
            {
                if (aliases[j] is not var (shift, dchi))
                {
                    refined[j] = refined[j] with
                    {
                        Verdict = OrderVerdict.Unknown,
                        Note = string.Join("; ", new[] { refined[j].Note, $"order not checked: {orderStop}" }.Where(n => n is not null)),
                    };
                    continue;
                }

                var doubtful = dchi < options.DoubtfulDeltaChiSquare;
                refined[j] = refined[j] with
                {
                    AliasShiftHz = Finite(shift),
                    AliasDeltaChiSquare = Finite(dchi),
                    Verdict = doubtful ? OrderVerdict.Doubtful : OrderVerdict.Secure,
                };
                if (doubtful)
                    warnings.Add($"line at {Quantity.FormatFrequency(refined[j].FrequencyHz)}: its order is doubtful; moved by {Quantity.FormatFrequency(shift)} it fits almost as well (Δχ² = {dchi:F1})");
            }
        }

        // sweep fits with the refined model
        var model = data.Model(layout, fit.P);
        var sweepFits = new List<SweepFit>();
        for (var k = 0; k < sweeps.Count; k++)
        {
            var (start, count) = data.Range(k);
            double chi = 0, ss = 0;
            for (var i = 0; i < count; i++)
            {
                var r = data.Y[start + i] - model[start + i];
                ss += r * r;
                chi += r * r * data.W[start + i];
            }

            var dof = Math.Max(1, count - (layout.Count / sweeps.Count));
            var phi = (k == 0 ? 0 : fit.P[layout.Phi(k)]) - anchorHz;
            var g = k == 0 ? 1 : fit.P[layout.G(k)];
            sweepFits.Add(grid.Sweeps[k] with
            {
                OffsetHz = phi, Gain = g, Background = fit.P[layout.B(k)], ChiSquare = chi, ReducedChiSquare = chi / dof, ResidualRms = Math.Sqrt(ss / count),
                Model = model[start..(start + count)],
            });
        }

        // internal frequencies are relative to sweep 0's origin: internal = (old relative) − φ₀(old)
        var phi0 = grid.Sweeps[0].OffsetHz;
        var shiftedGrid = new FrequencyGrid(grid.Grid.StartHz - phi0 - anchorHz, grid.Grid.StepHz, grid.Grid.Count);
        // the limit uses the same test as the pruning: Wald z² against the threshold with the χ²-scaled variance
        var detection = DetectionLimit(sweeps, grid with { Grid = shiftedGrid, Sweeps = sweepFits }, threshold * red, aAnchor);
        var spectrumScale = grid.Lines.Max(l => l.RawIntensity) / aAnchor;

        // unambiguous range for the weakest kept line at this noise
        var weakest = Enumerable.Range(0, layout.Lines).MinBy(j => fit.P[layout.A(j)]);
        var aWeak = fit.P[layout.A(weakest)];
        double? range = null;
        var lowerBound = false;
        string? statement;
        if (ordersResolved)
        {
            var limit = Math.Max(grid.Grid.EndHz - grid.Grid.StartHz, 2 * grid.UnambiguousRangeHz);
            var (r, lb) = UnambiguousRange(sweeps, sweepFits, aWeak, options.DoubtfulDeltaChiSquare, limit);
            range = Finite(r);
            lowerBound = lb;
            var who = $"the order of a line as weak as the weakest one kept (intensity {aWeak / aAnchor:G3} of the anchor)";
            var dchi = options.DoubtfulDeltaChiSquare.ToString("G3", System.Globalization.CultureInfo.InvariantCulture);
            statement = range is null
                ? $"at this noise {who} cannot be pinned: a shift of a few linewidths already fits within Δχ² < {dchi}"
                : lb
                    ? $"for these instruments and this noise {who} is unambiguous within ±{Quantity.FormatFrequency(r)}: no shift up to that fits within Δχ² < {dchi}"
                    : $"for these instruments and this noise {who} is unambiguous within ±{Quantity.FormatFrequency(r)}: a shift of that size would fit within Δχ² < {dchi}";
        }
        else
        {
            statement = "one instrument: the spectrum is folded into one FSR; orders are unknown";
        }

        var result = grid with
        {
            Grid = shiftedGrid,
            Spectrum = grid.Spectrum.Select(v => v * spectrumScale).ToArray(),
            Lines = refined.OrderBy(l => l.FrequencyHz).ToList(),
            Sweeps = sweepFits,
            DetectionLimit = detection,
            Warnings = warnings,
            ReducedChiSquare = red,
            Refined = true,
        };
        var diag = new RefinementDiagnostics(fit.Converged, fit.Reason, fit.Iterations, fit.ChiSquare, red, threshold, dropped)
        {
            Merged = merged,
            Pinned = pinned,
            IterationsUsed = budget.Used,
            IterationBudget = options.IterationBudget,
            CpuSeconds = budget.CpuSeconds,
            BudgetExhausted = budget.Exhausted is null ? null : $"{budget.Exhausted} (after the line fit: order check or bootstrap cut short)",
            Groups = data.Groups(layout, fit.P).Distinct().Count(),
            UnambiguousRangeHz = range,
            UnambiguousRangeIsLowerBound = lowerBound,
            UnambiguousForIntensity = Finite(aWeak / aAnchor),
            UnambiguousStatement = statement,
        };
        return (result, diag);
    }

    private static double? Finite(double v) => double.IsFinite(v) ? v : null;

    /// <summary>
    /// Covariance of the fitted parameters that the uncertainty of the calibrated scan axes causes, by linear
    /// propagation: an axis whose shape coefficients are off by δc shifts the fit by δp = F⁻¹ B δc (F the Fisher matrix,
    /// B from <see cref="Data.AxisSensitivity"/>), so Cov = F⁻¹ (Σ B C Bᵀ) F⁻¹, the sum over the distinct axes (sweeps
    /// sharing an axis add their B first, since they share its error). Null when no sweep carries an axis uncertainty.
    /// Parameters undetermined in F⁻¹ (NaN) stay NaN.
    /// </summary>
    public static Matrix<double>? AxisCovariance(Data data, Layout layout, FitResult fit)
    {
        var groups = new List<(object Group, double[,] B, double[] C)>();
        for (var k = 0; k < data.Sweeps.Count; k++)
        {
            if (data.Sweeps[k].AxisUncertainty is not { } axis) continue;
            var b = data.AxisSensitivity(layout, fit.P, k, axis);
            var at = groups.FindIndex(g => ReferenceEquals(g.Group, axis.Group) && g.B.GetLength(1) == b.GetLength(1));
            if (at < 0)
            {
                groups.Add((axis.Group, b, axis.ShapeCovariance));
                continue;
            }

            var sum = groups[at].B;
            for (var u = 0; u < b.GetLength(0); u++)
            for (var m = 0; m < b.GetLength(1); m++)
                sum[u, m] += b[u, m];
        }

        if (groups.Count == 0) return null;
        var n = layout.Count;
        var middle = Matrix<double>.Build.Dense(n, n);
        foreach (var (_, b, c) in groups)
        {
            var d = b.GetLength(1);
            var bm = Matrix<double>.Build.Dense(n, d, (u, m) => b[u, m]);
            var cm = Matrix<double>.Build.Dense(d, d, (i, j) => c[i * d + j]);
            middle += bm * cm * bm.Transpose();
        }

        var bad = Enumerable.Range(0, n).Select(i => !double.IsFinite(fit.Unscaled[i, i])).ToArray();
        var inverse = fit.Unscaled.Map(v => double.IsFinite(v) ? v : 0);
        var cov = inverse * middle * inverse;
        for (var i = 0; i < n; i++)
        for (var j = 0; j < n; j++)
            if (bad[i] || bad[j]) cov[i, j] = double.NaN;
        return cov;
    }

    // ---------------------------------------------------------------- model

    /// <summary>All samples of all sweeps, concatenated, with their weights 1/σ².</summary>
    public sealed class Data
    {
        public Data(IReadOnlyList<CalibratedSweep> sweeps)
        {
            Sweeps = sweeps;
            Start = new int[sweeps.Count + 1];
            for (var k = 0; k < sweeps.Count; k++)
            {
                var s = sweeps[k];
                if (s.ScanHz.Length != s.Signal.Length) throw new ArgumentException($"{s.Name}: scan and signal lengths differ ({s.ScanHz.Length} vs {s.Signal.Length})");
                if (!(s.NoiseSigma > 0) || !double.IsFinite(s.NoiseSigma)) throw new ArgumentException($"{s.Name}: the noise σ must be positive and finite but is {s.NoiseSigma}");
                Start[k + 1] = Start[k] + s.Signal.Length;
            }

            M = Start[^1];
            Y = new double[M];
            W = new double[M];
            F = new double[M];
            SignalScale = new double[sweeps.Count];
            for (var k = 0; k < sweeps.Count; k++)
            {
                var s = sweeps[k];
                var largest = 0.0;
                for (var i = 0; i < s.Signal.Length; i++)
                {
                    Y[Start[k] + i] = s.Signal[i];
                    W[Start[k] + i] = 1 / (s.NoiseSigma * s.NoiseSigma);
                    F[Start[k] + i] = s.ScanHz[i];
                    largest = Math.Max(largest, Math.Abs(s.Signal[i]));
                }

                SignalScale[k] = Math.Max(largest, 1e-12);
            }
        }

        /// <summary>Largest |signal| of each sweep (at least 10⁻¹²): the scale of its background in the fit.</summary>
        public double[] SignalScale { get; }

        public IReadOnlyList<CalibratedSweep> Sweeps { get; }
        public int[] Start { get; }
        public int M { get; }
        public double[] Y { get; }
        public double[] W { get; }
        public double[] F { get; }

        public (int Start, int Count) Range(int k) => (Start[k], Start[k + 1] - Start[k]);


        public double[] Model(Layout layout, IReadOnlyList<double> p, double[]? into = null)
        {
            var y = into ?? new double[M];
            var q = p as double[] ?? p.ToArray();
            for (var k = 0; k < Sweeps.Count; k++)
            {
                var phi = k == 0 ? 0 : q[layout.Phi(k)];
                var g = k == 0 ? 1 : q[layout.G(k)];
                var b = q[layout.B(k)];
                var shapes = LineShapes(Sweeps[k].Instrument, layout, q);
                for (var i = Start[k]; i < Start[k + 1]; i++)
                {
                    var v = 0.0;
                    for (var j = 0; j < layout.Lines; j++)
                        v += q[layout.A(j)] * shapes[j].Evaluate(q[layout.Nu(j)] - phi - F[i]).T;
                    y[i] = g * v + b;
                }
            }

            return y;
        }

        public double ChiSquare(Layout layout, IReadOnlyList<double> p, double[]? y = null)
        {
            var model = Model(layout, p);
            var obs = y ?? Y;
            double chi = 0;
            for (var i = 0; i < M; i++) chi += (obs[i] - model[i]) * (obs[i] - model[i]) * W[i];
            return chi;
        }

        /// <summary>
        /// Normal equations of the weighted fit at <paramref name="p"/> against observations <paramref name="y"/>: fills
        /// <paramref name="jtj"/> ≈ JᵀWJ (row-major, both triangles) and <paramref name="jtr"/> = JᵀW(y − model), returns χ².
        /// One pass over the samples. The model, χ² and the gradient JᵀW(y − model) are exact: every line is evaluated at
        /// every sample (one Airy evaluation each). The Gauss–Newton matrix keeps, for each sample, only the lines whose
        /// folded distance from it is below <see cref="CutoffLinewidths"/> linewidths (plus the sweep's own offset, gain and
        /// background), so its cost is Σ (parameters near a sample)² — linear in the samples the lines touch — and lines
        /// that share no sample within the cutoff have no entry between them (separate blocks, see <see cref="Groups"/>).
        /// The neglected entries are products of Airy tails (below ((1 + 4K²)⁻¹)² of the peak for cutoff K): they change
        /// the steps a little, not the minimum, which is fixed by the exact gradient.
        /// </summary>
        public double Normal(Layout layout, double[] p, double[] y, double[] jtj, double[] jtr)
        {
            var n = layout.Count;
            Array.Clear(jtj);
            Array.Clear(jtr);
            double chi = 0;
            var lines = layout.Lines;
            var t = new double[lines];
            var dt = new double[lines];
            var dw = layout.Widths ? new double[lines] : null;
            var per = layout.Widths ? 3 : 2;
            var index = new int[per * lines + 3];
            var row = new double[index.Length];
            for (var k = 0; k < Sweeps.Count; k++)
            {
                var inst = Sweeps[k].Instrument;
                var phi = k == 0 ? 0 : p[layout.Phi(k)];
                var g = k == 0 ? 1 : p[layout.G(k)];
                var b = p[layout.B(k)];
                var shapes = LineShapes(inst, layout, p);
                var wide = layout.Widths ? LineShapes(inst, layout, p, WidthStep(inst)) : null;
                var h = WidthStep(inst);
                var fsr = inst.FsrHz;
                var reach = new double[lines];
                for (var j = 0; j < lines; j++)
                    reach[j] = CutoffLinewidths * (inst.LinewidthHz + (layout.Widths ? Math.Abs(p[layout.W(j)]) : 0));
                for (var i = Start[k]; i < Start[k + 1]; i++)
                {
                    var f = F[i];
                    double sumT = 0, sumDT = 0;
                    for (var j = 0; j < lines; j++)
                    {
                        var delta = p[layout.Nu(j)] - phi - f;
                        (t[j], dt[j]) = shapes[j].Evaluate(delta);
                        var a = p[layout.A(j)];
                        sumT += a * t[j];
                        sumDT += a * dt[j];
                        if (dw is not null) dw[j] = (p[layout.W(j)] < 0 ? -1 : 1) * g * a * (wide![j].Evaluate(delta).T - t[j]) / h;
                    }

                    var w = W[i];
                    var r = y[i] - (g * sumT + b);
                    chi += r * r * w;
                    var wr = w * r;
                    // exact gradient for every line; the near ones also enter the Gauss–Newton matrix
                    var used = 0;
                    for (var j = 0; j < lines; j++)
                    {
                        var a = p[layout.A(j)];
                        double rn = g * a * dt[j], ra = g * t[j];
                        jtr[layout.Nu(j)] += wr * rn;
                        jtr[layout.A(j)] += wr * ra;
                        if (dw is not null) jtr[layout.W(j)] += wr * dw[j];
                        var delta = p[layout.Nu(j)] - phi - f;
                        var folded = delta - fsr * Math.Round(delta / fsr);
                        if (Math.Abs(folded) >= reach[j]) continue;
                        index[used] = layout.Nu(j);
                        row[used++] = rn;
                        index[used] = layout.A(j);
                        row[used++] = ra;
                        if (dw is not null)
                        {
                            index[used] = layout.W(j);
                            row[used++] = dw[j];
                        }
                    }

                    if (k > 0)
                    {
                        jtr[layout.Phi(k)] += wr * -g * sumDT;
                        jtr[layout.G(k)] += wr * sumT;
                        index[used] = layout.Phi(k);
                        row[used++] = -g * sumDT;
                        index[used] = layout.G(k);
                        row[used++] = sumT;
                    }

                    jtr[layout.B(k)] += wr;
                    index[used] = layout.B(k);
                    row[used++] = 1;
                    for (var u = 0; u < used; u++)
                    {
                        var ru = w * row[u];
                        if (ru == 0) continue;
                        var iu = index[u] * n;
                        for (var v = u; v < used; v++) jtj[iu + index[v]] += ru * row[v];
                    }
                }
            }

            // each pair of parameters was accumulated in one cell only, (index[u], index[v]) with u ≤ v in the list order,
            // which is not the numerical order (ν₀, a₀, ν₁, … vs the layout ν₀, ν₁, …, a₀, …): the other cell is zero, so the
            // sum of the two is the element
            for (var u = 0; u < n; u++)
            for (var v = u + 1; v < n; v++)
            {
                var sum = jtj[u * n + v] + jtj[v * n + u];
                jtj[u * n + v] = sum;
                jtj[v * n + u] = sum;
            }

            return chi;
        }

        /// <summary>Lines within this many linewidths (folded, per instrument) of a sample enter its row of the Gauss–Newton
        /// matrix (see <see cref="Normal"/>); infinity: every line (the dense matrix).</summary>
        public double CutoffLinewidths { get; init; } = double.PositiveInfinity;

        public static double WidthStep(Instrument inst) => inst.LinewidthHz * 1e-3;

        /// <summary>
        /// Groups of lines that share samples: two lines are linked when, in some sweep's instrument, their folded distance
        /// is below twice the cutoff reach (so a sample could lie within the reach of both); a group is a connected set.
        /// Lines of different groups have no Gauss–Newton entry between them and fit independently but for the shared
        /// sweep parameters. Returns a group number per line (0, 1, … in order of first appearance).
        /// </summary>
        public int[] Groups(Layout layout, double[] p)
        {
            var lines = layout.Lines;
            var parent = Enumerable.Range(0, lines).ToArray();
            int Root(int x)
            {
                while (parent[x] != x) x = parent[x] = parent[parent[x]];
                return x;
            }

            foreach (var inst in Sweeps.Select(s => s.Instrument).DistinctBy(i => (i.FsrHz, i.LinewidthHz)))
            {
                for (var i = 0; i < lines; i++)
                for (var j = i + 1; j < lines; j++)
                {
                    if (!double.IsFinite(CutoffLinewidths)) { parent[Root(i)] = Root(j); continue; }
                    var wi = layout.Widths ? Math.Abs(p[layout.W(i)]) : 0;
                    var wj = layout.Widths ? Math.Abs(p[layout.W(j)]) : 0;
                    var reach = CutoffLinewidths * (2 * inst.LinewidthHz + wi + wj);
                    var d = p[layout.Nu(i)] - p[layout.Nu(j)];
                    var folded = d - inst.FsrHz * Math.Round(d / inst.FsrHz);
                    if (Math.Abs(folded) < reach) parent[Root(i)] = Root(j);
                }
            }

            var ids = new Dictionary<int, int>();
            var group = new int[lines];
            for (var j = 0; j < lines; j++)
            {
                var r = Root(j);
                if (!ids.TryGetValue(r, out var id)) ids[r] = id = ids.Count;
                group[j] = id;
            }

            return group;
        }

        /// <summary>
        /// B = JᵀW·∂model/∂c (parameters × d) for sweep k's axis shape coefficients c₁…c_d: a sample's model moves by
        /// (∂model/∂f)·δf(x) when its scan frequency f(x) is off by δf(x) = Σ δcₘ tᵐ, t the axis's normalised x.
        /// </summary>
        public double[,] AxisSensitivity(Layout layout, double[] p, int k, AxisUncertainty axis)
        {
            var d = axis.Polynomial.Degree;
            var b = new double[layout.Count, d];
            var rows = new SweepRows(this, layout, p, k);
            var powers = new double[d];
            for (var i = Start[k]; i < Start[k + 1]; i++)
            {
                rows.Fill(i, out var slope);
                var t = (axis.X[i - Start[k]] - axis.Polynomial.Center) / axis.Polynomial.HalfRange;
                var pm = t;
                for (var m = 0; m < d; m++)
                {
                    powers[m] = W[i] * slope * pm;
                    pm *= t;
                }

                for (var u = 0; u < rows.Used; u++)
                {
                    var ru = rows.Row[u];
                    if (ru == 0) continue;
                    for (var m = 0; m < d; m++) b[rows.Index[u], m] += ru * powers[m];
                }
            }

            return b;
        }

        /// <summary>Per-line profile constants for one instrument (<paramref name="extraWidth"/> is added to each line's |w|).</summary>
        public static LineShape[] LineShapes(Instrument inst, Layout layout, double[] p, double extraWidth = 0)
        {
            var shapes = new LineShape[layout.Lines];
            for (var j = 0; j < layout.Lines; j++)
                shapes[j] = LineShape.For(inst, (layout.Widths ? Math.Abs(p[layout.W(j)]) : 0) + extraWidth);
            return shapes;
        }
    }

    /// <summary>
    /// The Jacobian rows of one sweep's samples: which parameters a row can depend on (<see cref="Index"/>, the first
    /// <see cref="Used"/>: the lines and the sweep's own offset, gain and background) and, after <see cref="Fill"/>, the
    /// derivatives of the model in that order (not whitened).
    /// </summary>
    public sealed class SweepRows
    {
        private readonly Data _data;
        private readonly Layout _layout;
        private readonly double[] _p;
        private readonly int _k;
        private readonly double _phi, _g, _b;
        private readonly LineShape[] _shapes;
        private readonly LineShape[]? _wide;

        public SweepRows(Data data, Layout layout, double[] p, int k)
        {
            _data = data;
            _layout = layout;
            _p = p;
            _k = k;
            var inst = data.Sweeps[k].Instrument;
            _phi = k == 0 ? 0 : p[layout.Phi(k)];
            _g = k == 0 ? 1 : p[layout.G(k)];
            _b = p[layout.B(k)];
            _shapes = Data.LineShapes(inst, layout, p);
            _wide = layout.Widths ? Data.LineShapes(inst, layout, p, WidthStep(inst)) : null;
            Index = new int[(layout.Widths ? 3 : 2) * layout.Lines + 3];
            Row = new double[Index.Length];
            var used = 0;
            for (var j = 0; j < layout.Lines; j++)
            {
                Index[used++] = layout.Nu(j);
                Index[used++] = layout.A(j);
                if (layout.Widths) Index[used++] = layout.W(j);
            }

            if (k > 0)
            {
                Index[used++] = layout.Phi(k);
                Index[used++] = layout.G(k);
            }

            Index[used++] = layout.B(k);
            Used = used;
        }

        public int[] Index { get; }
        public double[] Row { get; }
        public int Used { get; }

        private static double WidthStep(Instrument inst) => inst.LinewidthHz * 1e-3;

        /// <summary>Fills <see cref="Row"/> for sample i and returns the model there; <paramref name="slope"/> is
        /// ∂model/∂f, the model's change per Hz of the sample's scan frequency f(xᵢ).</summary>
        public double Fill(int i, out double slope)
        {
            var layout = _layout;
            var p = _p;
            var f = _data.F[i];
            double sumT = 0, sumDT = 0;
            var c = 0;
            for (var j = 0; j < layout.Lines; j++)
            {
                var delta = p[layout.Nu(j)] - _phi - f;
                var (t, dt) = _shapes[j].Evaluate(delta);
                var a = p[layout.A(j)];
                sumT += a * t;
                sumDT += a * dt;
                Row[c++] = _g * a * dt;
                Row[c++] = _g * t;
                if (_wide is not null)
                {
                    // the model uses |w|; forward difference in |w|, signed by w
                    var h = WidthStep(_data.Sweeps[_k].Instrument);
                    Row[c++] = (p[layout.W(j)] < 0 ? -1 : 1) * _g * a * (_wide[j].Evaluate(delta).T - t) / h;
                }
            }

            if (_k > 0)
            {
                Row[c++] = -_g * sumDT;
                Row[c++] = sumT;
            }

            Row[c] = 1;
            slope = -_g * sumDT;
            return _g * sumT + _b;
        }
    }

    /// <summary>
    /// Airy profile T(δ) of a line, and its derivative in δ, with an optional intrinsic Lorentzian FWHM: a Lorentzian
    /// convolved with the (near-Lorentzian) Airy peak is modelled as an Airy of linewidth (instrument + intrinsic) scaled
    /// to keep the area, exact for Lorentzians in the high-finesse limit. The constants of one instrument and width are
    /// computed once.
    /// </summary>
    public readonly record struct LineShape(double Area, double Fc, double PiOverFsr)
    {
        /// <summary>The cavity's transverse families (offset o_N·FSR in Hz, relative height), part of the response; null when none.</summary>
        public (double ShiftHz, double Height)[]? Families { get; init; }

        public static LineShape For(Instrument inst, double width)
        {
            var lw = inst.LinewidthHz;
            var finesse = width > 0 ? inst.FsrHz / (lw + width) : inst.Finesse;
            return new LineShape(width > 0 ? lw / (lw + width) : 1.0, Airy.CoefficientOfFinesse(finesse), Math.PI / inst.FsrHz)
            {
                Families = inst.Families.Count == 0 ? null : inst.Families.Select(f => (f.GouyOffsetFsr * inst.FsrHz, f.RelativeHeight)).ToArray(),
            };
        }

        public (double T, double dT) Evaluate(double delta)
        {
            var (t, dt) = Peak(delta);
            if (Families is { } fams)
                foreach (var (shift, height) in fams)
                {
                    var (tf, dtf) = Peak(delta - shift);
                    t += height * tf;
                    dt += height * dtf;
                }

            return (t, dt);
        }

        private (double T, double dT) Peak(double delta)
        {
            var (s, c) = Math.SinCos(PiOverFsr * delta);
            var t = 1 / (1 + Fc * s * s);
            return (Area * t, -Area * Fc * 2 * s * c * PiOverFsr * t * t);
        }
    }

    /// <summary>Parameter vector layout: ν (lines), a (lines), w (lines, optional), φ (sweeps 1..), g (sweeps 1..), b (sweeps).</summary>
    public sealed record Layout(int Lines, int SweepCount, bool Widths)
    {
        public int Nu(int j) => j;
        public int A(int j) => Lines + j;
        public int W(int j) => 2 * Lines + j;
        private int Base => (Widths ? 3 : 2) * Lines;
        public int Phi(int k) => Base + (k - 1);
        public int G(int k) => Base + (SweepCount - 1) + (k - 1);
        public int B(int k) => Base + 2 * (SweepCount - 1) + k;
        public int Count => Base + 3 * SweepCount - 2;

        /// <summary>Start vector from the grid result; widths start at a tenth of the narrowest linewidth (the model uses |w|).</summary>
        public double[] Initial(IReadOnlyList<UnfoldedLine> lines, IReadOnlyList<SweepFit> sweeps, double narrowLinewidthHz)
        {
            // grid results are relative to the anchor; internally sweep 0's origin is 0
            var phi0 = sweeps[0].OffsetHz;
            var p = new double[Count];
            for (var j = 0; j < Lines; j++)
            {
                p[Nu(j)] = lines[j].FrequencyHz - phi0;
                p[A(j)] = lines[j].RawIntensity;
                if (Widths) p[W(j)] = 0.1 * narrowLinewidthHz;
            }

            for (var k = 1; k < SweepCount; k++)
            {
                p[Phi(k)] = sweeps[k].OffsetHz - phi0;
                p[G(k)] = sweeps[k].Gain / sweeps[0].Gain;
            }

            for (var k = 0; k < SweepCount; k++) p[B(k)] = sweeps[k].Background;
            return p;
        }

        /// <summary>The layout without line j, and the parameter vector mapped onto it.</summary>
        public (Layout Layout, double[] P) Without(int j, IReadOnlyList<double> p)
        {
            var next = this with { Lines = Lines - 1 };
            var q = new double[next.Count];
            var t = 0;
            for (var i = 0; i < Lines; i++)
            {
                if (i == j) continue;
                q[next.Nu(t)] = p[Nu(i)];
                q[next.A(t)] = p[A(i)];
                if (Widths) q[next.W(t)] = p[W(i)];
                t++;
            }

            for (var k = 1; k < SweepCount; k++)
            {
                q[next.Phi(k)] = p[Phi(k)];
                q[next.G(k)] = p[G(k)];
            }

            for (var k = 0; k < SweepCount; k++) q[next.B(k)] = p[B(k)];
            return (next, q);
        }

        /// <summary>Parameters held fixed: the positions of pinned lines.</summary>
        public bool[] FixedMask(IReadOnlyList<Tracked> tracked)
        {
            var mask = new bool[Count];
            for (var j = 0; j < Lines; j++) mask[Nu(j)] = tracked[j].Pinned;
            return mask;
        }

        public int FreeCount(bool[] mask) => mask.Count(m => !m);
    }

    /// <summary>A fit: parameters, covariance (unscaled: inverse Fisher matrix = CRB; scaled: × reduced χ²), χ², exit state.
    /// Fixed parameters have zero variance; undetermined ones (null space of a singular Fisher matrix) NaN.</summary>
    public sealed record FitResult(double[] P, Matrix<double> Unscaled, Matrix<double> Scaled, double ChiSquare, bool Converged, string Reason, int Iterations);

    public static FitResult Fit(Data data, Layout layout, double[] p0, RefineOptions options, bool[]? isFixed = null, double[]? y = null,
        WorkBudget? budget = null, string? label = null)
    {
        isFixed ??= new bool[layout.Count];
        // scales: positions and widths in linewidths, intensities and gains relative to their start values
        var scales = new double[layout.Count];
        for (var i = 0; i < layout.Count; i++) scales[i] = 1;
        var lw = data.Sweeps.Min(s => s.Instrument.LinewidthHz);
        for (var j = 0; j < layout.Lines; j++)
        {
            scales[layout.Nu(j)] = lw;
            scales[layout.A(j)] = Math.Max(Math.Abs(p0[layout.A(j)]), 1e-12);
            if (layout.Widths) scales[layout.W(j)] = lw;
        }

        for (var k = 1; k < layout.SweepCount; k++)
        {
            scales[layout.Phi(k)] = lw;
            scales[layout.G(k)] = Math.Max(Math.Abs(p0[layout.G(k)]), 1e-12);
        }

        for (var k = 0; k < layout.SweepCount; k++) scales[layout.B(k)] = data.SignalScale[k];

        // block structure: the line groups (lines sharing no sample within the cutoff), the sweep parameters as the border
        var groups = data.Groups(layout, p0);
        var blocks = new int[layout.Count];
        Array.Fill(blocks, -1);
        for (var j = 0; j < layout.Lines; j++)
        {
            blocks[layout.Nu(j)] = groups[j];
            blocks[layout.A(j)] = groups[j];
            if (layout.Widths) blocks[layout.W(j)] = groups[j];
        }

        // step tolerance 1e-9 scaled units (positions: 1e-9 linewidth), far below any uncertainty; χ² tolerance 1e-9,
        // far below the Δχ² of 1 that one standard error costs
        var problem = new Problem(data, layout, y ?? data.Y, blocks, budget, label);
        // χ² here is in units of the noise: a change of 10⁻³ moves no parameter by a noticeable fraction of its σ
        var outcome = LevenbergMarquardt.Minimise(problem, p0, scales, isFixed, options.MaxIterations, chiSquareTolerance: 1e-3, budget: budget);
        if (outcome.Exit == LmExit.Budget)
        {
            // out of budget: no covariance (its eigen-decomposition costs (parameters)³, and nothing uses it after a stop)
            var none = Matrix<double>.Build.Dense(layout.Count, layout.Count, double.NaN);
            return new FitResult(outcome.P, none, none, outcome.ChiSquare, false, BudgetReason, outcome.Iterations);
        }

        return Summarise(data, layout, outcome, isFixed);
    }

    /// <summary>The refinement as a least-squares problem for <see cref="LevenbergMarquardt"/>.</summary>
    private sealed class Problem(Data data, Layout layout, double[] y, int[] blocks, WorkBudget? budget, string? label) : ILeastSquaresProblem
    {
        public int Count => layout.Count;

        public int[]? Blocks => blocks;

        public double Normal(double[] p, double[] jtj, double[] jtr)
        {
            var chi = data.Normal(layout, p, y, jtj, jtr);
            if (label is not null) budget?.Report($"{label}: {layout.Lines} line(s), χ² {chi:G6}");
            return chi;
        }
    }

    private static string Describe(LmExit exit) => exit switch
    {
        LmExit.SmallStep => "converged: step below tolerance",
        LmExit.SmallDecrease => "converged: χ² decrease below tolerance",
        LmExit.NoFurtherDecrease => "converged: no step lowers χ² further",
        LmExit.IterationLimit => IterationLimitReason,
        LmExit.Budget => BudgetReason,
        _ => "non-finite model values",
    };

    private const string IterationLimitReason = "iteration limit reached";
    private const string BudgetReason = "work budget used up";

    private static FitResult Summarise(Data data, Layout layout, LmOutcome outcome, bool[] isFixed)
    {
        var p = outcome.P;
        var chi = outcome.ChiSquare;
        var n = layout.Count;
        var free = Enumerable.Range(0, n).Where(i => !isFixed[i]).ToArray();
        var unscaled = Matrix<double>.Build.Dense(n, n);
        if (double.IsFinite(chi) && p.All(double.IsFinite))
        {
            var fisher = Matrix<double>.Build.Dense(free.Length, free.Length, (a, b) => outcome.Fisher[free[a] * n + free[b]]);
            var cov = PseudoInverse(fisher);
            for (var a = 0; a < free.Length; a++)
            for (var b = 0; b < free.Length; b++)
                unscaled[free[a], free[b]] = cov[a, b];
        }
        else
        {
            chi = double.NaN;
            unscaled = Matrix<double>.Build.Dense(n, n, double.NaN);
        }

        var red = chi / Math.Max(1, data.M - free.Length);
        return new FitResult(p, unscaled, unscaled * red, chi, outcome.Converged, Describe(outcome.Exit), outcome.Iterations);
    }

    /// <summary>
    /// Inverse of a symmetric positive semi-definite Fisher matrix by eigen-decomposition of its diagonally scaled form.
    /// Directions with eigenvalues below 1e-12 of the largest are the null space; a parameter with a noticeable component
    /// there (or a zero diagonal) is undetermined and its row and column are NaN. The rest is the pseudo-inverse.
    /// </summary>
    public static Matrix<double> PseudoInverse(Matrix<double> fisher)
    {
        var n = fisher.RowCount;
        var d = new double[n];
        var bad = new bool[n];
        for (var i = 0; i < n; i++)
        {
            d[i] = fisher[i, i] > 0 && double.IsFinite(fisher[i, i]) ? 1 / Math.Sqrt(fisher[i, i]) : 0;
            bad[i] = d[i] == 0;
        }

        var scaled = Matrix<double>.Build.Dense(n, n, (i, j) => fisher[i, j] * d[i] * d[j]);
        if (!scaled.Enumerate().All(double.IsFinite)) return Matrix<double>.Build.Dense(n, n, double.NaN);
        var evd = scaled.Evd(Symmetricity.Symmetric);
        var values = evd.EigenValues.Select(c => c.Real).ToArray();
        var vectors = evd.EigenVectors;
        var max = values.Max();
        var inv = Matrix<double>.Build.Dense(n, n);
        for (var e = 0; e < n; e++)
        {
            if (values[e] > 1e-12 * max)
            {
                for (var i = 0; i < n; i++)
                for (var j = 0; j < n; j++)
                    inv[i, j] += vectors[i, e] * vectors[j, e] / values[e];
            }
            else
            {
                for (var i = 0; i < n; i++)
                    if (Math.Abs(vectors[i, e]) > 0.05) bad[i] = true;
            }
        }

        for (var i = 0; i < n; i++)
        for (var j = 0; j < n; j++)
            inv[i, j] = bad[i] || bad[j] ? double.NaN : inv[i, j] * d[i] * d[j];
        return inv;
    }

    // ---------------------------------------------------------------- bootstrap

    /// <summary>Residual-bootstrap standard deviations of the line positions relative to the anchor, and how many replicates
    /// were completed within the budget (fewer than 10: no estimate, null).</summary>
    private static (double[]? Sigmas, int Done) BootstrapSigmas(Data data, Layout layout, FitResult fit, int anchor, RefineOptions options, bool[] mask, WorkBudget budget)
    {
        var rng = new Random(options.Seed);
        var model = data.Model(layout, fit.P);
        var resid = new double[data.M];
        for (var i = 0; i < data.M; i++) resid[i] = data.Y[i] - model[i];
        var samples = new List<double[]>();
        var done = 0;
        for (var b = 0; b < options.Bootstrap; b++)
        {
            var y = new double[data.M];
            for (var k = 0; k < data.Sweeps.Count; k++)
            {
                var (s, c) = data.Range(k);
                for (var i = 0; i < c; i++) y[s + i] = model[s + i] + resid[s + rng.Next(c)];
            }

            budget.Report($"bootstrap replicate {b + 1} of {options.Bootstrap}");
            var f = Fit(data, layout, fit.P, options with { MaxIterations = 50 }, mask, y, budget);
            if (f.Reason == BudgetReason) break;
            done++;
            if (!f.P.All(double.IsFinite)) continue;
            samples.Add(Enumerable.Range(0, layout.Lines).Select(j => f.P[layout.Nu(j)] - f.P[layout.Nu(anchor)]).ToArray());
        }

        if (done < options.Bootstrap && samples.Count < 10) return (null, done);
        var result = new double[layout.Lines];
        for (var j = 0; j < layout.Lines; j++)
        {
            if (samples.Count < 2)
            {
                result[j] = double.NaN;
                continue;
            }

            var v = samples.Select(s => s[j]).ToArray();
            var mean = v.Average();
            result[j] = Math.Sqrt(v.Sum(t => (t - mean) * (t - mean)) / (v.Length - 1));
        }

        return (result, done);
    }

    // ---------------------------------------------------------------- order confidence

    /// <summary>Shifts Δ that make a line look alike in at least one instrument, ranked by alias margin (smallest first).</summary>
    public static List<double> AliasShifts(IReadOnlyList<Instrument> instruments, double lineHz, (double Start, double End) window, int count)
    {
        var shifts = new List<(double d, double margin)>();
        foreach (var inst in instruments)
        {
            var mMax = (int)Math.Ceiling((window.End - window.Start) / inst.FsrHz);
            for (var m = -mMax; m <= mMax; m++)
            {
                if (m == 0) continue;
                var d = m * inst.FsrHz;
                var target = lineHz + d;
                if (target < window.Start || target > window.End) continue;
                shifts.Add((d, AliasMargin.Margin(instruments, d)));
            }
        }

        return shifts.OrderBy(s => s.margin).Select(s => s.d).Distinct().Take(count).ToList();
    }

    /// <summary>Best alternative placement of line j: each candidate shift gets a quick refit of the moved line's position
    /// and intensity and the backgrounds (other lines fixed); the best one, when it is anywhere near the doubtful threshold,
    /// gets a full Levenberg–Marquardt refit of every parameter. Returns the shift and Δχ² against the solution.</summary>
    private static (double Shift, double DeltaChi) BestAlias(Data data, Layout layout, FitResult fit, int j, IReadOnlyList<Instrument> instruments,
        (double Start, double End) window, double anchorHz, RefineOptions options, bool[] mask, WorkBudget budget)
    {
        var nu = fit.P[layout.Nu(j)];
        var shifts = AliasShifts(instruments, nu - anchorHz, window, options.AliasCandidates);
        var bestShift = double.NaN;
        var bestDelta = double.PositiveInfinity;
        var bestNu = double.NaN;
        var bestA = double.NaN;
        var others = fit.P.ToArray();
        others[layout.A(j)] = 0;
        var fixedModel = data.Model(layout, others);
        foreach (var d in shifts)
        {
            var (chi, nuMoved, aMoved) = RefitMoved(data, layout, fit.P, j, nu + d, fixedModel, budget);
            if (budget.Exhausted is not null) return (double.NaN, double.NaN);
            var delta = chi - fit.ChiSquare;
            if (delta < bestDelta)
            {
                bestDelta = delta;
                bestShift = d;
                bestNu = nuMoved;
                bestA = aMoved;
            }
        }

        if (double.IsFinite(bestDelta) && bestDelta < 4 * options.DoubtfulDeltaChiSquare)
        {
            var q = fit.P.ToArray();
            q[layout.Nu(j)] = bestNu;
            q[layout.A(j)] = Math.Max(bestA, 1e-6 * Math.Abs(fit.P[layout.A(j)]));
            var m = (bool[])mask.Clone();
            m[layout.Nu(j)] = false;
            var alt = Fit(data, layout, q, options with { MaxIterations = Math.Min(options.MaxIterations, 100) }, m, budget: budget);
            var lw = data.Sweeps.Max(s => s.Instrument.LinewidthHz);
            if (double.IsFinite(alt.ChiSquare) && Math.Abs(alt.P[layout.Nu(j)] - bestNu) < 2 * lw && alt.ChiSquare - fit.ChiSquare < bestDelta)
                bestDelta = alt.ChiSquare - fit.ChiSquare;
        }

        return (bestShift, Math.Max(0, bestDelta));
    }

    /// <summary>χ² after moving line j to <paramref name="nuNew"/> and refitting its position, intensity and the backgrounds
    /// (Gauss–Newton, a few steps; the other lines stay as fitted). Also returns the moved line's final position and intensity.</summary>
    private static (double Chi, double Nu, double A) RefitMoved(Data data, Layout layout, double[] p, int j, double nuNew, double[] fixedModel, WorkBudget budget)
    {
        var nu = nuNew;
        var a = p[layout.A(j)];
        var k = data.Sweeps.Count;
        var bg = new double[k];
        var width = layout.Widths ? Math.Abs(p[layout.W(j)]) : 0;
        var lw = data.Sweeps.Min(s => s.Instrument.LinewidthHz);
        var shapes = data.Sweeps.Select(s => LineShape.For(s.Instrument, width)).ToArray(); // the moved line's profile per sweep

        double Chi(double nuT, double aT, double[] bgT)
        {
            double c = 0;
            for (var s = 0; s < k; s++)
            {
                var phi = s == 0 ? 0 : p[layout.Phi(s)];
                var g = s == 0 ? 1 : p[layout.G(s)];
                for (var i = data.Start[s]; i < data.Start[s + 1]; i++)
                {
                    var r = data.Y[i] - (fixedModel[i] + g * aT * shapes[s].Evaluate(nuT - phi - data.F[i]).T + bgT[s]);
                    c += r * r * data.W[i];
                }
            }

            return c;
        }

        var chi = Chi(nu, a, bg);
        for (var it = 0; it < 10; it++)
        {
            if (!budget.Spend()) break;
            // parameters: nu, a, bg_k (offsets to fixedModel's backgrounds)
            var n = 2 + k;
            var jtj = Matrix<double>.Build.Dense(n, n);
            var jtr = Vector<double>.Build.Dense(n);
            var row = new double[n];
            for (var s = 0; s < k; s++)
            {
                var phi = s == 0 ? 0 : p[layout.Phi(s)];
                var g = s == 0 ? 1 : p[layout.G(s)];
                for (var i = data.Start[s]; i < data.Start[s + 1]; i++)
                {
                    var (t, dt) = shapes[s].Evaluate(nu - phi - data.F[i]);
                    var r = data.Y[i] - (fixedModel[i] + g * a * t + bg[s]);
                    var wgt = data.W[i];
                    Array.Clear(row);
                    row[0] = g * a * dt;
                    row[1] = g * t;
                    row[2 + s] = 1;
                    for (var u = 0; u < n; u++)
                    {
                        if (row[u] == 0) continue;
                        jtr[u] += wgt * row[u] * r;
                        for (var v = 0; v < n; v++) jtj[u, v] += wgt * row[u] * row[v];
                    }
                }
            }

            for (var u = 0; u < n; u++) jtj[u, u] *= 1.0001;
            Vector<double> step;
            try
            {
                step = jtj.Solve(jtr);
            }
            catch (ArithmeticException)
            {
                break;
            }

            if (!step.All(double.IsFinite)) break;
            // damped step: halve until χ² does not rise
            var accepted = false;
            for (var h = 1.0; h > 1e-3; h /= 2)
            {
                var nuT = nu + Math.Clamp(h * step[0], -lw, lw);
                var aT = Math.Max(0, a + h * step[1]);
                var bgT = bg.Select((b, s) => b + h * step[2 + s]).ToArray();
                var c = Chi(nuT, aT, bgT);
                if (c <= chi)
                {
                    accepted = chi - c > 1e-9 * chi;
                    (nu, a, bg, chi) = (nuT, aT, bgT, c);
                    break;
                }
            }

            if (!accepted) break;
        }

        return (chi, nu, a);
    }

    // ---------------------------------------------------------------- unambiguous range at this noise

    /// <summary>
    /// Approximate Δχ² between a line of raw intensity <paramref name="intensity"/> (first sweep's gain = 1) and the same line
    /// moved by <paramref name="shiftHz"/> with its intensity refitted, from each sweep's sample density: with N_k samples
    /// spread evenly over whole FSRs, Σᵢ h(uᵢ) ≈ (N_k/FSR_k)∫₀^FSR h, so with c_k = (a g_k/σ_k)² N_k/FSR_k and the Airy
    /// autocorrelation R_k(δ) = ∫₀^FSR T(u)T(u+δ)du, Δχ² = S₀ − S₁²/S₀ where S₀ = Σ c_k R_k(0), S₁ = Σ c_k R_k(δ).
    /// R_k has a closed form: the Airy function is a multiple of the Poisson kernel P_r, and P_r ⊛ P_r = P_{r²}, so
    /// R(δ) = FSR·((1−r)/(1+r))²·P_{r²}(2πδ/FSR) with P_s(θ) = (1−s²)/(1−2s cos θ+s²) and r from 𝓕 = π√r/(1−r).
    /// Backgrounds drop out (a moved line has the same mean over whole FSRs); other lines are ignored.
    /// </summary>
    public static double AliasChiSquareEstimate(IReadOnlyList<CalibratedSweep> sweeps, IReadOnlyList<SweepFit> fits, double intensity, double shiftHz)
    {
        double s0 = 0, s1 = 0;
        for (var k = 0; k < sweeps.Count; k++)
        {
            var inst = sweeps[k].Instrument;
            var c = Math.Pow(intensity * fits[k].Gain / sweeps[k].NoiseSigma, 2) * sweeps[k].Signal.Length / inst.FsrHz;
            s0 += c * AiryAutocorrelation(inst, 0);
            s1 += c * AiryAutocorrelation(inst, shiftHz);
        }

        return s0 > 0 ? s0 - s1 * s1 / s0 : 0;
    }

    /// <summary>∫₀^FSR T(u)·T(u+δ) du for the Airy function of peak 1 (closed form via the Poisson kernel).</summary>
    public static double AiryAutocorrelation(Instrument inst, double deltaHz)
    {
        var f = inst.Finesse;
        var x = (-Math.PI + Math.Sqrt(Math.PI * Math.PI + 4 * f * f)) / (2 * f); // √r
        var r = x * x;
        var s = r * r;
        var theta = 2 * Math.PI * deltaHz / inst.FsrHz;
        var poisson = (1 - s * s) / (1 - 2 * s * Math.Cos(theta) + s * s);
        var q = (1 - r) / (1 + r);
        return inst.FsrHz * q * q * poisson;
    }

    /// <summary>
    /// Smallest shift Δ &gt; 0 beyond the line's own peak at which <see cref="AliasChiSquareEstimate"/> falls below
    /// <paramref name="threshold"/>, scanned in steps of a quarter of the narrowest linewidth up to <paramref name="limitHz"/>.
    /// Returns (limit, true) when none is found; (NaN, false) when the line cannot even be told from itself moved by a few
    /// linewidths (too weak to place).
    /// </summary>
    public static (double RangeHz, bool LowerBound) UnambiguousRange(IReadOnlyList<CalibratedSweep> sweeps, IReadOnlyList<SweepFit> fits,
        double intensity, double threshold, double limitHz)
    {
        var narrow = sweeps.Min(s => s.Instrument.LinewidthHz);
        var wide = sweeps.Max(s => s.Instrument.LinewidthHz);
        var step = narrow / 4;
        var maxSteps = 4_000_000;
        if (limitHz / step > maxSteps) step = limitHz / maxSteps;
        var d = step;
        // leave the line's own peak
        while (d <= limitHz && AliasChiSquareEstimate(sweeps, fits, intensity, d) < threshold)
        {
            d += step;
            if (d > 4 * wide) return (double.NaN, false);
        }

        for (; d <= limitHz; d += step)
        {
            if (AliasChiSquareEstimate(sweeps, fits, intensity, d) < threshold) return (d, false);
        }

        return (limitHz, true);
    }

    // ---------------------------------------------------------------- detection limit

    /// <summary>
    /// Smallest intensity (relative to <paramref name="scale"/>) that would have added the threshold Δχ² at each grid
    /// frequency: a_min(ν) = √(threshold / Σ_k Σ_i (g_k T_k(ν − φ_k − f_k(x_i)) / σ_k)²). The inner sum is periodic in ν,
    /// so it is computed once per sweep on the periodic grid as (T² ⊛ Sᵀ1). Correlation with existing lines and with the
    /// backgrounds is ignored (the limit is optimistic where a candidate frequency shares its folded position with a strong
    /// line). Bins with no information are NaN (callers write them as empty).
    /// </summary>
    public static double[] DetectionLimit(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, double threshold, double scale)
    {
        var n = grid.Grid.Count;
        var info = new double[n];
        for (var k = 0; k < sweeps.Count; k++)
        {
            var s = sweeps[k];
            var inst = s.Instrument;
            var step = Math.Min(grid.Grid.StepHz / 2, inst.LinewidthHz / 20);
            var op = new SweepOperator(inst, s.ScanHz, grid.Grid, 0, step);
            var m = op.M;
            var kernel2 = new double[m];
            for (var i = 0; i < m; i++)
            {
                var t = Airy.Transmission(i * op.StepHz, inst.FsrHz, inst.Finesse);
                kernel2[i] = t * t;
            }

            var conv = new CircularConvolver(kernel2);
            var ones = Enumerable.Repeat(1.0, s.Signal.Length).ToArray();
            var st1 = new double[m];
            op.SampleTranspose(ones, st1);
            var q = new double[m];
            conv.Apply(st1, q);
            var fit = grid.Sweeps[k];
            var c = fit.Gain / s.NoiseSigma;
            for (var j = 0; j < n; j++)
            {
                var u = SweepOperator.PositiveMod(grid.Grid[j] - fit.OffsetHz, inst.FsrHz) / op.StepHz;
                var a = (int)Math.Floor(u);
                var t = u - a;
                if (a >= m) a -= m;
                var v = (1 - t) * q[a] + t * q[a + 1 == m ? 0 : a + 1];
                info[j] += c * c * v;
            }
        }

        return info.Select(v => v > 0 ? Math.Sqrt(threshold / v) / scale : double.NaN).ToArray();
    }
}
