namespace OrderUnfold.Inversion;

/// <summary>The joint solve's result: the last problem, its NNLS solution, and the sweeps' origins and gains it was built with.</summary>
/// <param name="Problem">The weighted problem of the last round.</param>
/// <param name="Nnls">Its solution (spectrum, then one background per sweep).</param>
/// <param name="OffsetsHz">Frequency origin of each sweep (not yet relative to the anchor).</param>
/// <param name="Gains">Gain of each sweep relative to the first.</param>
/// <param name="StoppedUnexplained">Why the rounds stopped before settling on a fit the model cannot explain, or null.</param>
internal sealed record JointSolution(UnfoldProblem Problem, NnlsResult Nnls, double[] OffsetsHz, double[] Gains, string? StoppedUnexplained = null);

/// <summary>
/// The joint solve of all sweeps on one grid: NNLS (warm-started) alternated with Gauss–Newton steps of the sweeps'
/// origins and regressions of their gains, until they settle (<see cref="UnfoldThresholds.SettledOffsetLinewidths"/>,
/// <see cref="UnfoldThresholds.SettledGainChange"/>) or <see cref="UnfoldOptions.GainRounds"/> rounds have run, or until
/// the fit is plainly one the model cannot explain (<see cref="CannotReachExplainedFit"/>).
/// </summary>
internal static class JointSolve
{
    /// <summary>Runs the rounds from the origins of the offset search and the first gains.</summary>
    internal static JointSolution Run(IReadOnlyList<CalibratedSweep> sweeps, Unfolder.GridLayout layout, double[] offsets, double[] gains,
        UnfoldOptions options, IProgress<string>? progress, CancellationToken cancellationToken)
    {
        var thresholds = options.Thresholds;
        UnfoldProblem problem = null!;
        NnlsResult nnls = null!;
        // one sweep has no relative gain or offset to refine: a single solve is the answer
        var rounds = sweeps.Count == 1 ? 0 : Math.Max(1, options.GainRounds);
        (double Lambda, double Mu, double[] Gains)? jointWeights = null;
        var previousWorst = double.NaN;
        string? stopped = null;
        for (var round = 0; round <= rounds; round++)
        {
            // the L1 and smoothness weights are set once from the first round's column norms, rescaled when gains move
            if (jointWeights is (double l0, double mu0, double[] g0s))
            {
                var ratio = Math.Sqrt(gains.Zip(g0s, (g, h) => (g / h) * (g / h)).Average());
                problem = new UnfoldProblem(sweeps, layout.Grid, offsets, gains, l0 * ratio, mu0 * ratio * ratio, layout.PeriodicStepHz);
            }
            else
            {
                problem = Unfolder.BuildProblem(sweeps, layout.Grid, offsets, gains, options, layout.PeriodicStepHz);
                jointWeights = (problem.L1Weight, problem.SmoothnessWeight, gains.ToArray());
            }

            nnls = NnlsSolver.Solve(problem, options.Solver, Unfolder.SolverOptions(problem, thresholds), problem.L1Weight, problem.SmoothnessWeight,
                round == 0 ? default : nnls.Solution, cancellationToken: cancellationToken);
            progress?.Report($"NNLS round {round + 1}: {nnls.ActiveCount} active entries after {nnls.Iterations} iterations ({nnls.Status})");
            if (round == rounds) break;
            var worst = WorstReducedChiSquare(sweeps, problem, nnls);
            if (CannotReachExplainedFit(worst, previousWorst, rounds - round, nnls.Status == SolverStatus.IterationLimit) is { } why)
            {
                stopped = why;
                progress?.Report(why);
                break;
            }

            previousWorst = worst;
            (offsets, var moved) = StepOffsets(sweeps, problem, nnls.Solution, offsets, thresholds);
            (gains, var gainChange) = RefitGains(sweeps, problem, nnls.Solution, gains);
            if (moved < thresholds.SettledOffsetLinewidths && gainChange < thresholds.SettledGainChange) rounds = round + 1;
        }

        return new JointSolution(problem, nnls, offsets, gains, stopped);
    }

    /// <summary>
    /// The rounds refine the sweeps' origins (at most <see cref="UnfoldThresholds.MaxOffsetStepLinewidths"/> a round) and
    /// gains; each costs a warm-started NNLS solve. A fit whose worst sweep stays above
    /// <see cref="UnfoldThresholds.MismatchReducedChiSquare"/> is refused by the pipeline however it ends. So the rounds
    /// stop when the worst sweep's reduced χ² (<paramref name="worst"/>; <paramref name="previous"/> the round before, NaN
    /// after the first solve) is above that level and
    /// <list type="bullet">
    /// <item>the solve stopped at its iteration cap (<paramref name="capped"/>): the active set kept growing, the mark of a
    /// model that does not fit the data (<see cref="GridSolveThresholds.MaxIterations"/>), and the next round would add up
    /// to another cap's worth of bins to a factor already that large (a sweep with one glitch sample, 2 × 25 000 samples:
    /// 2 400 iterations in the first round, 1 500 more taking 25 s in the second); or</item>
    /// <item>it would still be above that level after the <paramref name="roundsLeft"/> rounds at the rate of the last one
    /// (the same glitch on a fit that converged: 6.6 × 10⁸ in every round, eleven rounds of 0.8 s each for nothing).</item>
    /// </list>
    /// A fit that falls steeply, as one whose origin is still being walked in, goes on. Returns the reason, or null to go on.
    /// </summary>
    internal static string? CannotReachExplainedFit(double worst, double previous, int roundsLeft, bool capped = false)
    {
        const double threshold = UnfoldThresholds.MismatchReducedChiSquare;
        var explanation = $"the remaining rounds cannot bring it under {threshold:G} (the model does not explain the data)";
        if (double.IsNaN(worst)) return "joint rounds stopped: the worst sweep's reduced χ² is not a number";
        if (!(worst > threshold)) return null;
        if (capped)
            return $"joint rounds stopped: the NNLS solve stopped at its iteration cap with the worst sweep's reduced χ² at {worst:G3}; {explanation}";
        if (!(previous > 0)) return null;
        var rate = Math.Min(1.0, worst / previous);
        var projected = worst * Math.Pow(rate, Math.Max(1, roundsLeft));
        return projected > threshold
            ? $"joint rounds stopped: the worst sweep's reduced χ² is {worst:G3} (the round before: {previous:G3}), and at that rate {explanation}"
            : null;
    }

    /// <summary>The largest reduced χ² of one sweep under the round's solution (as <see cref="Unfolder"/> reports it).</summary>
    private static double WorstReducedChiSquare(IReadOnlyList<CalibratedSweep> sweeps, UnfoldProblem problem, NnlsResult nnls)
    {
        var models = problem.Model(nnls.Solution);
        var worst = 0.0;
        for (var k = 0; k < sweeps.Count; k++)
        {
            var chi = Unfolder.SweepChiSquare(sweeps[k].Signal, models[k], sweeps[k].NoiseSigma);
            worst = Math.Max(worst, chi / Unfolder.SweepDegreesOfFreedom(sweeps[k].Signal.Length, nnls.ActiveCount, sweeps.Count));
        }

        return worst;
    }

    /// <summary>One Gauss–Newton step of each sweep's origin but the first (which fixes the frequency origin), clamped to
    /// <see cref="UnfoldThresholds.MaxOffsetStepLinewidths"/>; also the largest step taken, in linewidths.</summary>
    private static (double[] Offsets, double MovedLinewidths) StepOffsets(IReadOnlyList<CalibratedSweep> sweeps, UnfoldProblem problem, double[] solution,
        double[] offsets, UnfoldThresholds thresholds)
    {
        var next = offsets.ToArray();
        var moved = 0.0;
        for (var k = 1; k < sweeps.Count; k++)
        {
            var lw = sweeps[k].Instrument.LinewidthHz;
            var limit = lw * thresholds.MaxOffsetStepLinewidths;
            var d = Math.Clamp(problem.OffsetStep(k, solution), -limit, limit);
            next[k] += d;
            moved = Math.Max(moved, Math.Abs(d) / lw);
        }

        return (next, moved);
    }

    /// <summary>Each sweep's gain regressed on the model of the current spectrum, relative to the first sweep's; also the
    /// largest relative change.</summary>
    private static (double[] Gains, double Change) RefitGains(IReadOnlyList<CalibratedSweep> sweeps, UnfoldProblem problem, double[] solution, double[] gains)
    {
        var spectrum = solution.AsSpan(0, problem.Grid.Count);
        var fitted = new double[sweeps.Count];
        for (var k = 0; k < sweeps.Count; k++)
        {
            var a = problem.ForwardUnscaled(k, spectrum);
            fitted[k] = GainFit.TryFit(a, sweeps[k].Signal, out var g, out _) && g > 0 && double.IsFinite(g) ? g : gains[k];
        }

        var first = fitted[0];
        var next = new double[gains.Length];
        var change = 0.0;
        for (var k = 0; k < gains.Length; k++)
        {
            next[k] = fitted[k] / first;
            change = Math.Max(change, Math.Abs(next[k] / gains[k] - 1));
        }

        return (next, change);
    }
}
