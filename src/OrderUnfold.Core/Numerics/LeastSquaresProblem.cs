using MathNet.Numerics.LinearAlgebra;

namespace OrderUnfold.Numerics;

/// <summary>A weighted least-squares problem as the Levenberg–Marquardt solver sees it: χ²(p) = Σ wᵢ(yᵢ − mᵢ(p))².</summary>
public interface ILeastSquaresProblem
{
    /// <summary>Number of parameters.</summary>
    int Count { get; }

    /// <summary>Fills the normal equations at <paramref name="p"/> — <paramref name="jtj"/> = JᵀWJ (row-major Count × Count,
    /// both triangles) and <paramref name="jtr"/> = JᵀW(y − m) with J = ∂m/∂p — and returns χ² there.</summary>
    double Normal(double[] p, double[] jtj, double[] jtr);

    /// <summary>Optional block structure of JᵀWJ: a block number per parameter (≥ 0) or −1 for parameters that may couple
    /// to every block (the border). Entries between two different blocks ≥ 0 are zero; the solver then factorises the
    /// damped matrix block by block (an arrowhead Cholesky, no fill-in between blocks). Null: dense.</summary>
    int[]? Blocks => null;
}

/// <summary>Why <see cref="LevenbergMarquardt.Minimise(ILeastSquaresProblem, double[], LmSettings)"/> stopped.</summary>
public enum LmExit
{
    /// <summary>The last step was below the step tolerance (in scaled units, or relative to the parameters).</summary>
    SmallStep,

    /// <summary>The predicted and achieved decrease of χ² fell below the χ² tolerance: a minimum to working precision.</summary>
    SmallDecrease,

    /// <summary>No step, however strongly damped, lowers χ² any more: a minimum to rounding.</summary>
    NoFurtherDecrease,

    /// <summary>The iteration limit was reached.</summary>
    IterationLimit,

    /// <summary>The shared <see cref="WorkBudget"/> was used up, or the caller's keep-going test said stop.</summary>
    Budget,

    /// <summary>The model or its derivatives gave a non-finite value at the start.</summary>
    NonFinite,
}

/// <summary>Outcome of <see cref="LevenbergMarquardt"/>. <see cref="Fisher"/> is JᵀWJ at <see cref="P"/> (row-major).</summary>
public sealed record LmOutcome(double[] P, double ChiSquare, double[] Fisher, LmExit Exit, int Iterations)
{
    /// <summary>Stopped on a convergence criterion.</summary>
    public bool Converged => Exit is LmExit.SmallStep or LmExit.SmallDecrease or LmExit.NoFurtherDecrease;

    /// <summary>(JᵀWJ)⁻¹ at <see cref="P"/> over all parameters (unscaled by χ²), or null when it is singular or not finite.</summary>
    public Matrix<double>? Covariance()
    {
        var n = P.Length;
        try
        {
            var inverse = Matrix<double>.Build.Dense(n, n, (i, j) => Fisher[i * n + j]).Inverse();
            return inverse.Enumerate().All(double.IsFinite) ? inverse : null;
        }
        catch (Exception e) when (e is ArgumentException or InvalidOperationException)
        {
            return null;
        }
    }
}

/// <summary>What a Levenberg–Marquardt fit may do and when it stops. Every criterion that is 0 (or null) is off.</summary>
public sealed record LmSettings
{
    /// <summary>Settings for whitened residuals in parameters of mixed units: no scaled step test; the fit stops after an
    /// accepted step that lowered χ² by less than <paramref name="tolerance"/> of it or moved every parameter by at most
    /// 1000·<paramref name="tolerance"/> of its value.</summary>
    public static LmSettings Relative(int maxIterations, double tolerance) => new()
    {
        MaxIterations = maxIterations, StepTolerance = 0, RelativeChiSquareTolerance = tolerance, RelativeStepTolerance = 1e3 * tolerance,
    };

    /// <summary>Typical size of each parameter: steps and the step tolerance are measured in these units (null: all 1).</summary>
    public double[]? Scales { get; init; }

    /// <summary>Parameters held at their start values (null: none).</summary>
    public bool[]? IsFixed { get; init; }

    /// <summary>Iteration limit (an iteration is one solve of the damped normal equations).</summary>
    public int MaxIterations { get; init; } = 100;

    /// <summary>Stop before a step when no parameter would move by more than this many of its scales (relative to its
    /// size when that is larger).</summary>
    public double StepTolerance { get; init; } = 1e-9;

    /// <summary>Stop after an accepted step that moved every parameter by at most this fraction of its value.</summary>
    public double RelativeStepTolerance { get; init; }

    /// <summary>Stop when a full step would lower χ² by less than this (absolute; χ² differences below it carry no information).</summary>
    public double ChiSquareTolerance { get; init; } = 1e-9;

    /// <summary>Stop after an accepted step that lowered χ² by less than this fraction of it.</summary>
    public double RelativeChiSquareTolerance { get; init; }

    /// <summary>An accepted step that lowers χ² by less than this is a crawl; <see cref="LevenbergMarquardt.CrawlSteps"/>
    /// crawls in a row end the fit (null: <see cref="ChiSquareTolerance"/>).</summary>
    public double? CrawlChiSquare { get; init; }

    /// <summary>Lower bounds of the parameters (null: none); trial points are clamped into the box.</summary>
    public double[]? Lower { get; init; }

    /// <summary>Upper bounds of the parameters (null: none).</summary>
    public double[]? Upper { get; init; }

    /// <summary>Shared work limits; each iteration spends one (null: only <see cref="MaxIterations"/>).</summary>
    public WorkBudget? Budget { get; init; }

    /// <summary>Asked before each iteration; false stops the fit where it is, with <see cref="LmExit.Budget"/>.</summary>
    public Func<bool>? KeepGoing { get; init; }

    /// <summary>Checked before each iteration: once cancelled, the fit throws <see cref="OperationCanceledException"/>.</summary>
    public CancellationToken CancellationToken { get; init; }
}
