namespace OrderUnfold.Inversion;

/// <summary>Why a solver stopped.</summary>
public enum SolverStatus
{
    /// <summary>KKT conditions hold within the tolerance.</summary>
    Converged,

    /// <summary>The iteration limit was reached first; the solution is feasible but not optimal.</summary>
    IterationLimit,

    /// <summary>The problem produced non-finite numbers.</summary>
    InvalidValues,
}

/// <summary>
/// Result of a nonnegative least-squares solve.
/// </summary>
/// <param name="Solution">The solution vector (constrained entries ≥ 0).</param>
/// <param name="Iterations">Outer iterations (columns added).</param>
/// <param name="Removals">Columns removed from the active set along the way.</param>
/// <param name="Status">Exit reason.</param>
/// <param name="Message">Human-readable exit reason.</param>
/// <param name="KktViolation">Largest violation of the KKT conditions at the end, in gradient units
/// (max over zero entries of the positive gradient part, and over positive entries of |gradient|).</param>
/// <param name="ActiveCount">Number of nonzero (or free) entries at the end.</param>
public sealed record NnlsResult(double[] Solution, int Iterations, int Removals, SolverStatus Status, string Message, double KktViolation, int ActiveCount)
{
    /// <summary>Which solver produced the solution.</summary>
    public NnlsMethod Method { get; init; } = NnlsMethod.ActiveSet;

    /// <summary>Why that solver was chosen (empty when it was called directly).</summary>
    public string Reason { get; init; } = "";

    /// <summary>Products G x the solve used (the dense solver's cost measure; 0 when not counted).</summary>
    public int Products { get; init; }

    /// <summary>The KKT tolerance the solver aimed at, in gradient units (NaN when not recorded).</summary>
    public double Tolerance { get; init; } = double.NaN;

    /// <summary>True when the active-set solver stopped because its support grew past its limit (see
    /// <see cref="ActiveSetNnls.Options.MaxActiveCount"/>).</summary>
    public bool HandedOver { get; init; }

    /// <summary>The objective ½ xᵀGx − bᵀx of <paramref name="eq"/> at <paramref name="x"/> (one product G x), to compare
    /// two solutions of the same problem.</summary>
    public static double ObjectiveOf(INormalEquations eq, double[] x)
    {
        var gx = new double[x.Length];
        eq.Multiply(x, gx);
        var b = eq.RightHandSide;
        var f = 0.0;
        for (var j = 0; j < x.Length; j++) f += 0.5 * x[j] * gx[j] - b[j] * x[j];
        return f;
    }

    /// <summary>
    /// The KKT violation of a point x of ½ xᵀGx − bᵀx subject to x ≥ 0 (free entries unconstrained), from its gradient
    /// b − Gx: the largest |gradient| over free or positive entries and the largest positive gradient over entries at zero;
    /// also the number of free or positive entries. One definition for every solver's final check.
    /// </summary>
    public static (double Violation, int ActiveCount) KktViolationOf(ReadOnlySpan<double> b, ReadOnlySpan<double> gx, ReadOnlySpan<double> x, ReadOnlySpan<bool> free)
    {
        var kkt = 0.0;
        var active = 0;
        for (var j = 0; j < x.Length; j++)
        {
            var grad = b[j] - gx[j];
            if (free[j] || x[j] > 0)
            {
                active++;
                kkt = Math.Max(kkt, Math.Abs(grad));
            }
            else
            {
                kkt = Math.Max(kkt, Math.Max(0, grad));
            }
        }

        return (kkt, active);
    }
}

/// <summary>The NNLS solvers.</summary>
public enum NnlsMethod
{
    /// <summary>Lawson–Hanson active set (<see cref="ActiveSetNnls"/>): fast for sparse support.</summary>
    ActiveSet,

    /// <summary>Gradient projection with conjugate gradients (<see cref="DenseNnls"/>): for dense support.</summary>
    Dense,
}

