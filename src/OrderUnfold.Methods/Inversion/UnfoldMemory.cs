namespace OrderUnfold.Inversion;

/// <summary>
/// How much memory an unfold of a given size needs, estimated before solving: the grid size limit follows from it
/// (<see cref="UnfoldOptions.MaxMemoryBytes"/>) rather than from a fixed bin count. Keep this the one estimate: a
/// check elsewhere (for instance of a grid step) should call it too.
/// </summary>
public static class UnfoldMemory
{
    /// <summary>Bytes per grid bin: the vectors of the problems alive at once (search grid, probe, weighted problem),
    /// both solvers' work vectors, the dense solver's preconditioner on a padded grid of up to 4n points, and the
    /// spectrum outputs. Set from the whole unfold's measured peak working set of 0.9 GB at 10⁶ bins with 2 × 20 000
    /// samples (issue 15), rounded up.</summary>
    public const long BytesPerBin = 1000;

    /// <summary>Bytes per sample: signal, scan axis, sampling tables, models and residuals of the fits.</summary>
    public const long BytesPerSample = 400;

    /// <summary>Estimated peak bytes of an unfold with <paramref name="bins"/> grid bins, <paramref name="samples"/>
    /// samples in all, and an active set of at most <paramref name="maxActive"/> entries (its Cholesky factor holds
    /// p²/2 numbers).</summary>
    public static long EstimateBytes(long bins, long samples, long maxActive) =>
        BytesPerBin * bins + BytesPerSample * samples + 4 * maxActive * maxActive + 64L * 1024 * 1024;

    /// <summary>The same, for the unfolder's joint solve on <paramref name="bins"/> bins (its active set is capped as
    /// <see cref="Unfolder"/> caps it).</summary>
    public static long EstimateUnfoldBytes(long bins, long samples) =>
        EstimateBytes(bins, samples, Math.Min(2500, Math.Max(500, bins / 4)));

    /// <summary>A byte count as "1.2 GB" (decimal units).</summary>
    public static string Format(long bytes) => bytes >= 1e9 ? $"{bytes / 1e9:F1} GB" : $"{bytes / 1e6:F0} MB";
}
