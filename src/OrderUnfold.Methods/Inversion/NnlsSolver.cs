namespace OrderUnfold.Inversion;

/// <summary>
/// Chooses between the active-set solver (sparse support: line spectra with an L1 weight) and the dense solver
/// (broadband spectra, no L1 weight, or a smoothness weight, where most bins end up active and every column the active
/// set adds costs a Cholesky update that grows with the support). The result says which solver ran and why.
/// </summary>
public static class NnlsSolver
{
    /// <summary>In automatic mode the active set hands over when it holds more than this fraction of the entries
    /// (and at least <see cref="MinHandover"/>).</summary>
    public const double HandoverFraction = 0.05;

    /// <summary>Smallest active-set size at which the automatic mode hands over.</summary>
    public const int MinHandover = 200;

    /// <summary>The active-set size at which the automatic mode hands over, for a problem of <paramref name="count"/> entries.</summary>
    public static int HandoverCount(int count) => Math.Max(MinHandover, (int)(HandoverFraction * count));

    /// <summary>
    /// Solves with the chosen solver. <paramref name="l1Weight"/> and <paramref name="smoothness"/> describe the problem's
    /// shape for the automatic choice; with <paramref name="handover"/> the automatic mode also hands an unpenalised
    /// problem from the active set to the dense solver when the support grows past <see cref="HandoverCount"/>. The dense solver takes the active set's tolerance and iteration scale; a handover is
    /// warm-started from the active set's iterate. A cancelled <paramref name="cancellationToken"/> stops whichever solver
    /// runs (<see cref="OperationCanceledException"/>).
    /// </summary>
    public static NnlsResult Solve(INormalEquations eq, SolverChoice choice, ActiveSetNnls.Options activeSet,
        double l1Weight, double smoothness, ReadOnlySpan<double> start = default, bool handover = false, CancellationToken cancellationToken = default)
    {
        DenseNnls.Options Dense() => new() { Tolerance = activeSet.Tolerance };
        switch (choice)
        {
            case SolverChoice.ActiveSet:
                return ActiveSetNnls.Solve(eq, activeSet, start, cancellationToken) with { Reason = "active set requested" };
            case SolverChoice.Dense:
                return DenseNnls.Solve(eq, Dense(), start, cancellationToken) with { Reason = "dense solver requested" };
        }

        // A smoothness weight makes the support dense and the problem well posed: the dense solver's case. Without it
        // (with or without an L1 weight) the support decides: the active set starts and hands over when it grows. The dense
        // solver is not started directly on an unpenalised problem, where a nearly singular G can stall it.
        if (smoothness > 0)
            return DenseNnls.Solve(eq, Dense(), start, cancellationToken) with { Reason = "smoothness weight on: dense support expected" };
        if (!handover) return ActiveSetNnls.Solve(eq, activeSet, start, cancellationToken) with { Reason = "no smoothness weight: sparse support expected" };

        // Handover by support (off by default: on field trace 08 it made the joint solve 20 s instead of 4 s of CPU, because
        // the dense solver stalls on the unpenalised problem and the active set then finishes from its iterate)
        var limit = HandoverCount(eq.Count);
        var first = ActiveSetNnls.Solve(eq, activeSet with { MaxActiveCount = Math.Min(activeSet.MaxActiveCount, limit) }, start, cancellationToken);
        if (!first.HandedOver) return first with { Reason = $"sparse support (fewer than {limit} active entries)" };
        var handoverReason = $"the active set passed {limit} of {eq.Count} entries after {first.Iterations} iterations; handed over to the dense solver";
        var dense = DenseNnls.Solve(eq, Dense(), first.Solution, cancellationToken);
        if (dense.Status == SolverStatus.Converged) return dense with { Reason = handoverReason };
        // the dense solver stalls on nearly singular problems (no smoothness weight): the active set finishes from its
        // iterate, within its own iteration limit, so the answer is never worse than the active set alone would give
        var finish = ActiveSetNnls.Solve(eq, activeSet, dense.Solution, cancellationToken);
        return finish with
        {
            Reason = $"{handoverReason}, which did not converge ({dense.Message}); the active set finished from its iterate",
            Products = dense.Products,
        };
    }
}
