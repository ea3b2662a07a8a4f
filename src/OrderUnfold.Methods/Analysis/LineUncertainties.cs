using MathNet.Numerics.LinearAlgebra;

namespace OrderUnfold.Analysis;

/// <summary>A settled refinement: the fit, its line layout and tracking, and the anchor (the strongest line, frequency 0).</summary>
/// <param name="Layout">The parameter layout.</param>
/// <param name="Fit">The final fit.</param>
/// <param name="Tracked">The lines, in layout order.</param>
/// <param name="Anchor">Index of the anchor line.</param>
internal sealed record RefinedSolution(ParameterLayout Layout, LineFitResult Fit, List<TrackedLine> Tracked, int Anchor)
{
    /// <summary>The anchor's position in the fit's frequency origin.</summary>
    public double AnchorHz => Fit.Parameters[Layout.Position(Anchor)];

    /// <summary>The anchor's raw intensity.</summary>
    public double AnchorIntensity => Fit.Parameters[Layout.Intensity(Anchor)];

    /// <summary>Parameters held fixed (positions of pinned lines).</summary>
    public bool[] FixedMask() => Layout.FixedMask(Tracked);
}

/// <summary>Uncertainties of a refined solution besides its covariance: the residual bootstrap and the propagated
/// uncertainty of the calibrated scan axes.</summary>
internal static class LineUncertainties
{
    /// <summary>Iteration limit of one bootstrap replicate's fit (it starts at the solution, near its own minimum).</summary>
    private const int BootstrapMaxIterations = 50;

    /// <summary>Fewer completed replicates than this give no bootstrap error when the budget cut the bootstrap short (a
    /// standard deviation from under ten draws scatters by more than 25 %).</summary>
    private const int MinReplicates = 10;

    /// <summary>Runs the bootstrap when asked for (<see cref="RefineOptions.Bootstrap"/>); adds a warning when the budget
    /// cut it short. Null when not run or too few replicates were done.</summary>
    public static double[]? Bootstrap(RefinementContext context, RefinedSolution solution)
    {
        var (options, budget) = (context.Options, context.Budget);
        if (options.Bootstrap <= 0) return null;
        budget.Report("bootstrap", force: true);
        var (sigmas, done) = BootstrapSigmas(context, solution);
        if (done < options.Bootstrap)
            context.Warnings.Add(sigmas is null
                ? $"the bootstrap stopped after {done} of {options.Bootstrap} replicates ({budget.Exhausted}); too few for an error estimate, none is reported"
                : $"the bootstrap stopped after {done} of {options.Bootstrap} replicates ({budget.Exhausted}); its errors rest on those");
        return sigmas;
    }

    /// <summary>Residual-bootstrap standard deviations of the line positions relative to the anchor, and how many replicates
    /// were completed within the budget (fewer than <see cref="MinReplicates"/>: no estimate, null).</summary>
    private static (double[]? Sigmas, int Done) BootstrapSigmas(RefinementContext context, RefinedSolution solution)
    {
        var (samples, options, budget) = (context.Samples, context.Options, context.Budget);
        var (layout, fit, anchor) = (solution.Layout, solution.Fit, solution.Anchor);
        var request = new LineFitRequest(BootstrapMaxIterations, solution.FixedMask(), budget);
        var rng = new Random(options.Seed);
        var model = samples.Model(layout, fit.Parameters);
        var resid = new double[samples.Count];
        for (var i = 0; i < samples.Count; i++) resid[i] = samples.Signal[i] - model[i];
        var replicates = new List<double[]>();
        var done = 0;
        for (var b = 0; b < options.Bootstrap; b++)
        {
            var y = new double[samples.Count];
            for (var k = 0; k < samples.Sweeps.Count; k++)
            {
                var (s, c) = samples.Range(k);
                for (var i = 0; i < c; i++) y[s + i] = model[s + i] + resid[s + rng.Next(c)];
            }

            budget.Report($"bootstrap replicate {b + 1} of {options.Bootstrap}");
            var f = LineFitter.Fit(samples, layout, fit.Parameters, request with { Observed = y });
            if (f.Reason == LineFitter.BudgetReason) break;
            done++;
            if (!f.Parameters.All(double.IsFinite)) continue;
            replicates.Add(Enumerable.Range(0, layout.LineCount).Select(j => f.Parameters[layout.Position(j)] - f.Parameters[layout.Position(anchor)]).ToArray());
        }

        if (done < options.Bootstrap && replicates.Count < MinReplicates) return (null, done);
        var result = new double[layout.LineCount];
        for (var j = 0; j < layout.LineCount; j++)
        {
            if (replicates.Count < 2)
            {
                result[j] = double.NaN;
                continue;
            }

            var v = replicates.Select(s => s[j]).ToArray();
            var mean = v.Average();
            result[j] = Math.Sqrt(v.Sum(t => (t - mean) * (t - mean)) / (v.Length - 1));
        }

        return (result, done);
    }

    /// <summary>
    /// Covariance of the fitted parameters that the uncertainty of the calibrated scan axes causes, by linear
    /// propagation: an axis whose shape coefficients are off by δc shifts the fit by δp = F⁻¹ B δc (F the Fisher matrix,
    /// B from <see cref="SweepSamples.AxisSensitivity"/>), so Cov = F⁻¹ (Σ B C Bᵀ) F⁻¹, the sum over the distinct axes (sweeps
    /// sharing an axis add their B first, since they share its error). Null when no sweep carries an axis uncertainty.
    /// Parameters undetermined in F⁻¹ (NaN) stay NaN.
    /// </summary>
    public static Matrix<double>? AxisCovariance(SweepSamples samples, ParameterLayout layout, LineFitResult fit)
    {
        var groups = new List<(object Group, double[,] B, double[] C)>();
        for (var k = 0; k < samples.Sweeps.Count; k++)
        {
            if (samples.Sweeps[k].AxisUncertainty is not { } axis) continue;
            var b = samples.AxisSensitivity(layout, fit.Parameters, k, axis);
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

        var bad = Enumerable.Range(0, n).Select(i => !double.IsFinite(fit.InverseFisher[i, i])).ToArray();
        var inverse = fit.InverseFisher.Map(v => double.IsFinite(v) ? v : 0);
        var cov = inverse * middle * inverse;
        for (var i = 0; i < n; i++)
        for (var j = 0; j < n; j++)
            if (bad[i] || bad[j]) cov[i, j] = double.NaN;
        return cov;
    }
}
