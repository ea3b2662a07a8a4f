using MathNet.Numerics.LinearAlgebra;

namespace OrderUnfold.Analysis;

/// <summary>A fit of the line model: parameters, covariance, χ², exit state. Fixed parameters have zero variance;
/// undetermined ones (null space of a singular Fisher matrix) NaN.</summary>
/// <param name="Parameters">The parameters at the end of the fit (see <see cref="ParameterLayout"/>).</param>
/// <param name="InverseFisher">The unscaled covariance, the inverse Fisher matrix: the Cramér–Rao bound.</param>
/// <param name="ScaledCovariance">The covariance scaled by the reduced χ².</param>
/// <param name="ChiSquare">χ² at the end of the fit.</param>
/// <param name="Converged">True when Levenberg–Marquardt stopped on a convergence criterion.</param>
/// <param name="Reason">Why it stopped, as text.</param>
/// <param name="Iterations">Iterations used.</param>
internal sealed record LineFitResult(double[] Parameters, Matrix<double> InverseFisher, Matrix<double> ScaledCovariance, double ChiSquare, bool Converged,
    string Reason, int Iterations);

/// <summary>What one fit of the line model is asked to do besides its start point.</summary>
/// <param name="MaxIterations">Levenberg–Marquardt iteration limit.</param>
/// <param name="Fixed">Parameters held at their start values (null: none).</param>
/// <param name="Budget">The refinement's shared work budget (null: unbounded).</param>
/// <param name="Observed">Observations to fit (null: the measured signal; the bootstrap passes its replicates).</param>
/// <param name="ProgressLabel">Label of the progress lines (null: none).</param>
internal sealed record LineFitRequest(int MaxIterations, bool[]? Fixed = null, WorkBudget? Budget = null, double[]? Observed = null,
    string? ProgressLabel = null);

/// <summary>Fits the line model to the samples by Levenberg–Marquardt (<see cref="LevenbergMarquardt"/>, on the normal
/// equations) and turns the Fisher matrix at the solution into covariances.</summary>
internal static class LineFitter
{
    /// <summary>The exit reason of a fit stopped by its iteration limit.</summary>
    public const string IterationLimitReason = "iteration limit reached";

    /// <summary>The exit reason of a fit stopped by the work budget.</summary>
    public const string BudgetReason = "work budget used up";

    /// <summary>Smallest scale of an intensity or a gain (their start values set the scale; a zero start must not give a
    /// zero scale).</summary>
    private const double MinRelativeScale = 1e-12;

    /// <summary>χ² (in units of the noise) decrease below which the fit has converged: a change of 10⁻³ moves no parameter
    /// by a noticeable fraction of its σ (one standard error costs Δχ² = 1).</summary>
    private const double ChiSquareTolerance = 1e-3;

    /// <summary>Eigenvalues of the scaled Fisher matrix below this fraction of the largest are its null space (well above
    /// the rounding of double precision, about 10⁻¹⁶ × the condition; common practice for a pseudo-inverse cut).</summary>
    private const double NullSpaceEigenvalueFraction = 1e-12;

    /// <summary>A parameter whose component in a null-space eigenvector exceeds this (of a unit vector) is undetermined.
    /// Chosen, not measured.</summary>
    private const double NullSpaceComponent = 0.05;

    /// <summary>Fits from <paramref name="start"/>.</summary>
    public static LineFitResult Fit(SweepSamples samples, ParameterLayout layout, double[] start, LineFitRequest request)
    {
        var isFixed = request.Fixed ?? new bool[layout.Count];
        var scales = Scales(samples, layout, start);

        // block structure: the line groups (lines sharing no sample within the cutoff), the sweep parameters as the border
        var groups = samples.LineGroups(layout, start);
        var blocks = new int[layout.Count];
        Array.Fill(blocks, -1);
        for (var j = 0; j < layout.LineCount; j++)
        {
            blocks[layout.Position(j)] = groups[j];
            blocks[layout.Intensity(j)] = groups[j];
            if (layout.FitsWidths) blocks[layout.Width(j)] = groups[j];
        }

        var problem = new RefinementProblem(samples, layout, request.Observed ?? samples.Signal, blocks, request.Budget, request.ProgressLabel);
        var outcome = LevenbergMarquardt.Minimise(problem, start, scales, isFixed, request.MaxIterations, chiSquareTolerance: ChiSquareTolerance,
            budget: request.Budget);
        if (outcome.Exit == LmExit.Budget)
        {
            // out of budget: no covariance (its eigen-decomposition costs (parameters)³, and nothing uses it after a stop)
            var none = Matrix<double>.Build.Dense(layout.Count, layout.Count, double.NaN);
            return new LineFitResult(outcome.P, none, none, outcome.ChiSquare, false, BudgetReason, outcome.Iterations);
        }

        return Summarise(samples, layout, outcome, isFixed);
    }

    /// <summary>Parameter scales: positions and widths in linewidths, intensities and gains relative to their start values,
    /// backgrounds in the sweep's signal scale.</summary>
    private static double[] Scales(SweepSamples samples, ParameterLayout layout, double[] start)
    {
        var scales = new double[layout.Count];
        for (var i = 0; i < layout.Count; i++) scales[i] = 1;
        var lw = samples.Sweeps.Min(s => s.Instrument.LinewidthHz);
        for (var j = 0; j < layout.LineCount; j++)
        {
            scales[layout.Position(j)] = lw;
            scales[layout.Intensity(j)] = Math.Max(Math.Abs(start[layout.Intensity(j)]), MinRelativeScale);
            if (layout.FitsWidths) scales[layout.Width(j)] = lw;
        }

        for (var k = 1; k < layout.SweepCount; k++)
        {
            scales[layout.Offset(k)] = lw;
            scales[layout.Gain(k)] = Math.Max(Math.Abs(start[layout.Gain(k)]), MinRelativeScale);
        }

        for (var k = 0; k < layout.SweepCount; k++) scales[layout.Background(k)] = samples.SignalScale[k];
        return scales;
    }

    /// <summary>The refinement as a least-squares problem for <see cref="LevenbergMarquardt"/>.</summary>
    private sealed class RefinementProblem(SweepSamples samples, ParameterLayout layout, double[] observed, int[] blocks, WorkBudget? budget, string? label)
        : ILeastSquaresProblem
    {
        public int Count => layout.Count;

        public int[]? Blocks => blocks;

        public double Normal(double[] p, double[] jtj, double[] jtr)
        {
            var chi = samples.NormalEquations(layout, p, observed, jtj, jtr);
            if (label is not null) budget?.Report($"{label}: {layout.LineCount} line(s), χ² {chi:G6}");
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

    private static LineFitResult Summarise(SweepSamples samples, ParameterLayout layout, LmOutcome outcome, bool[] isFixed)
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

        var red = chi / Math.Max(1, samples.Count - free.Length);
        return new LineFitResult(p, unscaled, unscaled * red, chi, outcome.Converged, Describe(outcome.Exit), outcome.Iterations);
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
            if (values[e] > NullSpaceEigenvalueFraction * max)
            {
                for (var i = 0; i < n; i++)
                for (var j = 0; j < n; j++)
                    inv[i, j] += vectors[i, e] * vectors[j, e] / values[e];
            }
            else
            {
                for (var i = 0; i < n; i++)
                    if (Math.Abs(vectors[i, e]) > NullSpaceComponent) bad[i] = true;
            }
        }

        for (var i = 0; i < n; i++)
        for (var j = 0; j < n; j++)
            inv[i, j] = bad[i] || bad[j] ? double.NaN : inv[i, j] * d[i] * d[j];
        return inv;
    }
}
