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
public sealed record NnlsResult(double[] Solution, int Iterations, int Removals, SolverStatus Status, string Message, double KktViolation, int ActiveCount);
