using OrderUnfold.Instruments;

namespace OrderUnfold.Inversion;

/// <summary>
/// Finds each sweep's frequency origin φ_k before the joint solve, coarse to fine.
/// <list type="number">
/// <item>Sweeps of an instrument already aligned (same FSR and finesse) follow from the cross-correlation of their folded
/// profiles: both see the same folded spectrum, shifted by the difference of their origins.</item>
/// <item>Otherwise the sweep is paired with the reference sweep (sweep 0). The search looks at a sub-window of the
/// frequency window around the anchor, reaching no further than the first shift at which the pair's alias margin falls
/// below one linewidth (<see cref="SearchWindow"/>). The default window and a widened one lie inside it, so there the
/// search sees the whole window as before; a wider window adds no information on the origin (beyond that shift the two
/// cavities' pattern repeats almost exactly), only more ways to fit a wrong origin with lines at alias positions — with
/// 10⁶ bins over 2.5 THz every origin fitted the demo within 0.5 % in χ². So the search's cost does not grow with the
/// window.</item>
/// <item>Coarse: the candidates are the origins that put the reference's strongest line (the anchor, ν = 0) on one of
/// the sweep's tallest folded peaks, or on one of its lower ones that is not the image of a taller peak through a known
/// transverse family (as many again, the best scores first): lines that fold onto one peak of the reference, and so make
/// it the tallest, can each be lower than other lines in the sweep's cavity (the demo recorded with 50 000 samples per
/// record: the anchor's line was B's fifth tallest peak, and the unfold explained the sweeps with 427 lines). They are
/// ranked, all at once, by the energy of the joint back-projection Σ_ν (A₀ᵀy₀)(ν)·(A_kᵀy_k)(ν; φ) over the sub-window,
/// approximated by the folded profiles: the reference profile is laid over the sub-window, folded onto the sweep's FSR
/// and cross-correlated with the sweep's profile by FFT, which scores all M origins of the sweep's periodic grid in
/// O(M log M) (<see cref="Score"/>). The score orders the solves but does not choose: origins that differ by a multiple
/// of the reference's FSR describe the same spectrum translated (only the pairing with the anchor fixes the translation),
/// and on a many-line comb (field trace 08) chance coincidences lift wrong origins above the right one.</item>
/// <item>Fine: the best-ranked candidate gets a full pair solve (L1-weighted NNLS of both sweeps on a grid twice as coarse,
/// with a heavier L1 weight so that a slightly misaligned model does not pull in hundreds of small bins); the others a
/// short solve first, and only those whose χ² is then within <see cref="ScreenChiSquareFactor"/> of the best one the full
/// solve (a wrong pairing is recognisable early by its χ²). The winner's origin is refined by Gauss–Newton steps with the spectrum re-solved after each accepted
/// step; the joint rounds in <see cref="Unfolder"/> polish it on the full grid.</item>
/// </list>
/// Cost: the coarse stage is O(samples + sub-window / periodic step + M log M) per sweep; the fine stage a bounded
/// number of solves on the sub-window's grid: independent of the window's size.
/// </summary>
public static class OffsetSearch
{
    /// <summary>The search's L1 weight relative to the unfold's (see the class remarks).</summary>
    public const double SparsityFactor = 4;

    /// <summary>A candidate whose χ² after the short solve exceeds this multiple of the best χ² so far is dropped.</summary>
    public const double ScreenChiSquareFactor = 2;

    /// <summary>Most Gauss–Newton refinements of the chosen origin.</summary>
    public const int RefineSteps = 4;

    /// <summary>Iteration budget of a whole pair solve: this many per folded peak of all sweeps, plus
    /// <see cref="WholeSolveBaseIterations"/> (each true line costs one active-set iteration per cavity that sees it; the
    /// rest is room for the small bins a slightly misaligned model pulls in). Chosen, not from a reference.</summary>
    public const int WholeSolveIterationsPerPeak = 4;

    /// <summary>Fixed part of a whole pair solve's budget (see <see cref="WholeSolveIterationsPerPeak"/>).</summary>
    public const int WholeSolveBaseIterations = 60;

    /// <summary>Iteration budget of a screening (short) solve, per folded peak, plus
    /// <see cref="ScreenBaseIterations"/>: half the whole budget, enough to tell a wrong pairing by its χ².</summary>
    public const int ScreenIterationsPerPeak = 2;

    /// <summary>Fixed part of a screening solve's budget.</summary>
    public const int ScreenBaseIterations = 30;

    /// <summary>The refinement of an origin stops when its step falls below the linewidth divided by this (a step of
    /// 1/200 linewidth moves the model by much less than its noise). Chosen, not from a reference.</summary>
    public const double RefineStopLinewidthFraction = 200;

    /// <summary>The pair search's periodic grid is at most the narrowest linewidth divided by this (ten points per
    /// linewidth resolve the Airy peak for the cross-correlation and the pair solve). Common practice.</summary>
    public const double PeriodicStepsPerLinewidth = 10;

    /// <summary>Origins found and the trials behind them.</summary>
    public sealed record Result(double[] OffsetsHz, List<OffsetTrial> Trials);

    /// <summary>
    /// Finds the origins of all sweeps. <paramref name="gains"/> are the provisional gains (relative to sweep 0),
    /// <paramref name="grid"/> the unfold's grid (the user's window), <paramref name="step"/> its step. A cancelled
    /// <paramref name="cancellationToken"/> stops the pair solves (<see cref="OperationCanceledException"/>).
    /// </summary>
    public static Result Run(IReadOnlyList<CalibratedSweep> sweeps, IReadOnlyList<double> gains, FrequencyGrid grid, double step,
        UnfoldOptions options, IProgress<string>? progress, CancellationToken cancellationToken = default)
    {
        var offsets = new double[sweeps.Count];
        var folded = sweeps.Select(Unfolder.FoldedPeaks).ToArray();
        // reference sweep: its strongest folded peak is the provisional origin (it puts that line at ν = 0, the anchor)
        offsets[0] = folded[0].Count > 0 ? -folded[0][0] : 0;
        var trials = new List<OffsetTrial>();
        var profiles = new Dictionary<int, double[]>();

        double[] Profile(int k)
        {
            if (!profiles.TryGetValue(k, out var p)) profiles[k] = p = FoldedProfile.Fold(sweeps[k], ProfileBins(sweeps[k].Instrument));
            return p;
        }

        var peaks = folded.Sum(f => f.Count);
        var wholeCap = WholeSolveIterationsPerPeak * peaks + WholeSolveBaseIterations;
        var settings = new PairSettings(options, grid, step, sweeps.Min(s => s.Instrument.LinewidthHz), wholeCap,
            Math.Min(wholeCap, ScreenIterationsPerPeak * peaks + ScreenBaseIterations), cancellationToken);
        for (var k = 1; k < sweeps.Count; k++)
        {
            var sibling = Enumerable.Range(0, k).FirstOrDefault(r => SameInstrument(sweeps[r].Instrument, sweeps[k].Instrument), -1);
            if (sibling >= 0)
            {
                var delta = FoldedProfile.Shift(Profile(sibling), Profile(k), sweeps[k].Instrument.FsrHz);
                offsets[k] = offsets[sibling] + delta;
                trials.Add(new OffsetTrial(sweeps[k].Name, offsets[k], double.NaN, true));
                continue;
            }

            var pair = new PairSearch(sweeps[0], sweeps[k], offsets[0], gains[0], gains[k], settings);
            var score = Score(Profile(0), sweeps[0].Instrument.FsrHz, offsets[0], Profile(k), sweeps[k].Instrument.FsrHz, pair.Lo, pair.Hi);
            offsets[k] = pair.Find(score, folded[k], trials, progress);
        }

        return new Result(offsets, trials);
    }

    /// <summary>What every pair search of one run shares: the unfold's options, grid and step, the narrowest linewidth,
    /// the iteration budgets of a whole and of a short (screening) pair solve, and the run's cancellation token.</summary>
    private sealed record PairSettings(UnfoldOptions Options, FrequencyGrid Grid, double Step, double NarrowestLinewidthHz, int Cap, int ScreenCap,
        CancellationToken CancellationToken);

    /// <summary>The origin of one sweep against the reference sweep: coarse candidates from the score, pair solves of the
    /// best-ranked ones, Gauss–Newton refinement of the winner.</summary>
    private sealed class PairSearch
    {
        private readonly CalibratedSweep[] _pair;
        private readonly double[] _pairGains;
        private readonly double _referenceOffset;
        private readonly PairSettings _settings;
        private readonly UnfoldOptions _searchOptions;
        private readonly FrequencyGrid _searchGrid;
        private readonly double _periodicStep;
        private (double Lambda, double Mu)? _weights;

        public PairSearch(CalibratedSweep reference, CalibratedSweep sweep, double referenceOffset, double referenceGain, double gain, PairSettings settings)
        {
            _pair = [reference, sweep];
            _pairGains = [referenceGain, gain];
            _referenceOffset = referenceOffset;
            _settings = settings;
            _searchOptions = settings.Options with { Sparsity = Math.Max(settings.Options.Sparsity, 1) * SparsityFactor };
            _periodicStep = Math.Min(settings.Step, settings.NarrowestLinewidthHz / PeriodicStepsPerLinewidth);
            (Lo, Hi) = SearchWindow([reference.Instrument, sweep.Instrument], settings.Grid, settings.Options.AliasThresholdLinewidths);
            _searchGrid = FrequencyGrid.Covering(Lo, Hi, settings.Step * 2);
        }

        /// <summary>Lower end of the sub-window searched, Hz.</summary>
        public double Lo { get; }

        /// <summary>Upper end of the sub-window searched, Hz.</summary>
        public double Hi { get; }

        private CalibratedSweep Sweep => _pair[1];

        /// <summary>The sweep's origin, with the trials behind it added to <paramref name="trials"/>.</summary>
        public double Find(double[] score, IReadOnlyList<double> foldedPeaks, List<OffsetTrial> trials, IProgress<string>? progress)
        {
            var inst = Sweep.Instrument;
            var count = _settings.Options.OffsetCandidates;
            // the pairings with the sweep's tallest folded peaks, and as many again of its other peaks, the best scores first
            var tallest = Math.Min(count, foldedPeaks.Count);
            var ranked = Candidates(score, inst.FsrHz, inst.LinewidthHz, foldedPeaks.Select(u => -u), int.MaxValue);
            var extra = ranked.Where(c => c.Rank >= tallest && !IsFamilyImage(foldedPeaks, c.Rank, inst)).Take(count);
            var candidates = ranked.Where(c => c.Rank < tallest).Concat(extra).OrderByDescending(c => c.Score).Select(c => c.Phi).ToList();
            if (candidates.Count == 0) candidates.Add(0);
            var (best, full) = Screen(candidates, trials);
            var (phiBest, chiBest) = Refine(best);
            trials.Add(new OffsetTrial(Sweep.Name, phiBest, chiBest, true));
            progress?.Report($"offset of {Sweep.Name}: {candidates.Count} candidate(s) ranked by the cross-correlation of folded profiles " +
                             $"over {Units.Quantity.FormatFrequency(Hi - Lo)}, {full} given the whole pair solve");
            return phiBest;
        }

        /// <summary>One pair solve at origin <paramref name="phi"/>: χ², solution, problem, and whether it converged.</summary>
        private (double Chi, double[] X, UnfoldProblem P, bool Converged) Eval(double phi, double[]? start, int iterations)
        {
            UnfoldProblem pr;
            if (_weights is (double l, double mu)) pr = new UnfoldProblem(_pair, _searchGrid, [_referenceOffset, phi], _pairGains, l, mu, _periodicStep);
            else
            {
                pr = Unfolder.BuildProblem(_pair, _searchGrid, [_referenceOffset, phi], _pairGains, _searchOptions, _periodicStep);
                _weights = (pr.L1Weight, pr.SmoothnessWeight);
            }

            var r = ActiveSetNnls.Solve(pr, Unfolder.SolverOptions(pr) with { MaxIterations = iterations }, start, _settings.CancellationToken);
            return (Unfolder.ChiSquare(pr, r.Solution, _pair), r.Solution, pr, r.Status == SolverStatus.Converged);
        }

        /// <summary>The best-ranked candidate gets the whole iteration budget; later ones a short solve first, and the whole
        /// solve only when their χ² is then close to the best one's. Returns the best and how many got the whole solve.</summary>
        private ((double Phi, double Chi, double[] X, UnfoldProblem P) Best, int Full) Screen(List<double> candidates, List<OffsetTrial> trials)
        {
            (double Phi, double Chi, double[] X, UnfoldProblem P)? best = null;
            var full = 0;
            foreach (var phi in candidates)
            {
                var first = best is null;
                var r = Eval(phi, null, first ? _settings.Cap : _settings.ScreenCap);
                if (first || r.Converged) full++;
                else if (!r.Converged && r.Chi < ScreenChiSquareFactor * best!.Value.Chi)
                {
                    r = Eval(phi, r.X, _settings.Cap); // close enough to the best to need the whole solve
                    full++;
                }

                trials.Add(new OffsetTrial(Sweep.Name, phi, r.Chi, false));
                if (best is null || r.Chi < best.Value.Chi) best = (phi, r.Chi, r.X, r.P);
            }

            return (best!.Value, full);
        }

        /// <summary>Gauss–Newton steps of the winner's origin (at most a linewidth, then half), the spectrum re-solved (warm)
        /// after each; a step that does not lower χ² is halved once, then the refinement stops.</summary>
        private (double Phi, double Chi) Refine((double Phi, double Chi, double[] X, UnfoldProblem P) best)
        {
            var (phiBest, chiBest, x, problem) = best;
            var lw = Sweep.Instrument.LinewidthHz;
            var limit = lw;
            for (var it = 0; it < RefineSteps; it++)
            {
                var d = Math.Clamp(problem.OffsetStep(1, x), -limit, limit);
                if (Math.Abs(d) < lw / RefineStopLinewidthFraction) break;
                var next = Eval(phiBest + d, x, _settings.Cap);
                if (!(next.Chi < chiBest))
                {
                    next = Eval(phiBest + d / 2, x, _settings.Cap);
                    if (!(next.Chi < chiBest)) break;
                    d /= 2;
                }

                phiBest += d;
                chiBest = next.Chi;
                x = next.X;
                problem = next.P;
                limit = lw / 2;
            }

            return (phiBest, chiBest);
        }
    }

    /// <summary>Alias margin (linewidths) below which the pair cannot tell two shifts apart at all: the search's sub-window
    /// reaches no further from the anchor than the first such shift (the same bound as the widest window the unfold widens to).</summary>
    public const double FarThresholdLinewidths = 1;

    /// <summary>
    /// The sub-window [lo, hi] of the grid the pair search looks at: the window, cut to ± the first shift at which the pair's
    /// alias margin falls below <see cref="FarThresholdLinewidths"/> around the anchor (ν = 0; the nearest point of the
    /// window when the window does not hold it). Beyond that shift the pattern of the two cavities repeats almost exactly,
    /// so a wider window adds no information on the origin, only more ways to fit a wrong one with lines at alias positions.
    /// The default window (up to the first alias at the alias threshold) and a window widened by the unfold lie inside it.
    /// </summary>
    public static (double Lo, double Hi) SearchWindow(IReadOnlyList<Instrument> pair, FrequencyGrid grid, double thresholdLinewidths)
    {
        var span = grid.EndHz - grid.StartHz;
        var from = AliasMargin.DefaultMinimumShiftHz(pair, thresholdLinewidths);
        var half = from < span ? AliasMargin.FirstBelow(pair, FarThresholdLinewidths, from, span) ?? span : span;
        if (2 * half >= span) return (grid.StartHz, grid.EndHz);
        var centre = Math.Clamp(0, grid.StartHz + half, grid.EndHz - half);
        return (centre - half, centre + half);
    }

    /// <summary>Points of the folded profile over one FSR: a power of two, at least ten per linewidth.</summary>
    public static int ProfileBins(Instrument instrument) =>
        1 << (int)Math.Ceiling(Math.Log2(Math.Max(64, 10 * instrument.Finesse)));

    /// <summary>
    /// The coarse score of every origin φ = i·FSR_k/M (i = 0 … M−1) of sweep k: the reference profile (origin
    /// <paramref name="referenceOffsetHz"/>) laid over the frequencies of [lo, hi], folded onto FSR_k, cross-correlated with
    /// the sweep's profile. A line at ν appears in sweep k at scan ν − φ (mod FSR_k), so at the right φ every line of the
    /// sub-window adds the product of its two peaks.
    /// </summary>
    public static double[] Score(double[] referenceProfile, double referenceFsrHz, double referenceOffsetHz, double[] profile, double fsrHz,
        double lo, double hi)
    {
        var m = profile.Length;
        var m0 = referenceProfile.Length;
        var delta = fsrHz / m;
        var laid = new double[m];
        var q0 = (long)Math.Ceiling(lo / delta);
        var q1 = (long)Math.Floor(hi / delta);
        for (var q = q0; q <= q1; q++)
        {
            var u = SweepOperator.PositiveMod(q * delta - referenceOffsetHz, referenceFsrHz) / referenceFsrHz * m0;
            var a = (int)Math.Floor(u);
            var t = u - a;
            if (a >= m0) a -= m0;
            var v = (1 - t) * referenceProfile[a] + t * referenceProfile[a + 1 == m0 ? 0 : a + 1];
            var w = (int)(q % m);
            if (w < 0) w += m;
            laid[w] += v;
        }

        return FoldedProfile.CrossCorrelation(laid, profile);
    }

    /// <summary>True when folded peak <paramref name="index"/> lies a known transverse family's offset (either way round the
    /// FSR, within a linewidth) from a taller folded peak: paired with the anchor it would put the anchor's line on that
    /// family's resonance, which the model of the pair solve can fit better than the right origin (a family 21 % tall at
    /// 0.064 FSR did so in CalibrationFamiliesTests).</summary>
    private static bool IsFamilyImage(IReadOnlyList<double> foldedPeaks, int index, Instrument inst)
    {
        var fsr = inst.FsrHz;
        // distance of two points on the circle of one FSR
        double Apart(double a, double b)
        {
            var d = SweepOperator.PositiveMod(a - b, fsr);
            return Math.Min(d, fsr - d);
        }

        for (var q = 0; q < index; q++)
        {
            var d = foldedPeaks[index] - foldedPeaks[q];
            foreach (var f in inst.Families)
            {
                // the family's resonances sit its offset after TEM00; the scan direction decides which way round they appear
                var o = f.GouyOffsetFsr * fsr;
                if (Apart(d, o) < inst.LinewidthHz || Apart(d, -o) < inst.LinewidthHz) return true;
            }
        }

        return false;
    }

    /// <summary>
    /// Candidate origins, best score first, at most <paramref name="count"/>, with each one's place in <paramref name="pairings"/>
    /// (Rank): the pairings <paramref name="pairings"/> (origins
    /// that put the anchor line, ν = 0, on one of the sweep's folded peaks), each scored by the highest value of
    /// <paramref name="score"/> within half a linewidth of it. The score alone cannot choose among origins that differ by a
    /// multiple of the reference's FSR: they describe the same spectrum translated by that multiple (the reference sweep
    /// cannot tell), and only the pairing with the anchor fixes the translation.
    /// </summary>
    public static List<(double Phi, double Score, int Rank)> Candidates(double[] score, double fsrHz, double linewidthHz, IEnumerable<double> pairings, int count)
    {
        var m = score.Length;
        var delta = fsrHz / m;
        var radius = Math.Max(0, (int)Math.Floor(linewidthHz / 2 / delta));
        var list = new List<(double Phi, double Score, int Rank)>();
        foreach (var p in pairings)
        {
            var centre = (int)Math.Round(SweepOperator.PositiveMod(p, fsrHz) / delta);
            var best = double.NegativeInfinity;
            for (var d = -radius; d <= radius; d++) best = Math.Max(best, score[(((centre + d) % m) + m) % m]);
            list.Add((p, best, list.Count));
        }

        return list.OrderByDescending(c => c.Score).Take(Math.Max(1, count)).ToList();
    }

    private static bool SameInstrument(Instrument a, Instrument b) =>
        a.Name == b.Name && a.FsrHz == b.FsrHz && a.Finesse == b.Finesse;
}
