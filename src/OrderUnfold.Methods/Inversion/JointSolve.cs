namespace OrderUnfold.Inversion;

/// <summary>The joint solve's result: the last problem, its NNLS solution, and the sweeps' origins and gains it was built with.</summary>
/// <param name="Problem">The weighted problem of the last round.</param>
/// <param name="Nnls">Its solution (spectrum, then one background per sweep).</param>
/// <param name="OffsetsHz">Frequency origin of each sweep (not yet relative to the anchor).</param>
/// <param name="Gains">Gain of each sweep relative to the first.</param>
internal sealed record JointSolution(UnfoldProblem Problem, NnlsResult Nnls, double[] OffsetsHz, double[] Gains);

/// <summary>
/// The joint solve of all sweeps on one grid: NNLS (warm-started) alternated with Gauss–Newton steps of the sweeps'
/// origins and regressions of their gains, until they settle (<see cref="UnfoldThresholds.SettledOffsetLinewidths"/>,
/// <see cref="UnfoldThresholds.SettledGainChange"/>) or <see cref="UnfoldOptions.GainRounds"/> rounds have run.
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
            (offsets, var moved) = StepOffsets(sweeps, problem, nnls.Solution, offsets, thresholds);
            (gains, var gainChange) = RefitGains(sweeps, problem, nnls.Solution, gains);
            if (moved < thresholds.SettledOffsetLinewidths && gainChange < thresholds.SettledGainChange) rounds = round + 1;
        }

        return new JointSolution(problem, nnls, offsets, gains);
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
