namespace OrderUnfold.Numerics;

/// <summary>
/// The work limits shared by every fit of one analysis stage: a count of iterations (each Levenberg–Marquardt solve,
/// each Gauss–Newton step of a quick refit, each bootstrap replicate's iterations) and a limit on the CPU time of the
/// calling thread. When either is used up, <see cref="Exhausted"/> says which and every fit that shares the budget
/// stops at its next iteration. Progress messages are passed on at most about once per second of wall time. The stage's
/// cancellation token rides with the budget: <see cref="Spend"/> throws <see cref="OperationCanceledException"/> once it is
/// cancelled, so every fit that shares the budget stops without a token parameter of its own.
/// </summary>
public sealed class WorkBudget
{
    private readonly double _cpuStart;
    private readonly System.Diagnostics.Stopwatch _clock = System.Diagnostics.Stopwatch.StartNew();
    private readonly IProgress<string>? _progress;
    private double _lastReport = double.NegativeInfinity;

    /// <param name="iterations">Iterations allowed in all (≤ 0: none).</param>
    /// <param name="cpuSeconds">CPU seconds of the calling thread allowed (not finite or ≤ 0: no limit).</param>
    /// <param name="progress">Where progress lines go.</param>
    /// <param name="cancellationToken">Stops the work: <see cref="Spend"/> throws once it is cancelled.</param>
    public WorkBudget(int iterations, double cpuSeconds, IProgress<string>? progress = null, CancellationToken cancellationToken = default)
    {
        CancellationToken = cancellationToken;
        IterationLimit = iterations;
        CpuLimitSeconds = cpuSeconds;
        _progress = progress;
        _cpuStart = ThreadCpuSeconds();
    }

    /// <summary>An unlimited budget (for fits that must not be cut short, e.g. inside tests of the solver).</summary>
    public static WorkBudget Unlimited() => new(int.MaxValue, double.PositiveInfinity);

    /// <summary>Most iterations all fits sharing this budget may take together.</summary>
    public int IterationLimit { get; }
    /// <summary>Most CPU seconds they may take together.</summary>
    public double CpuLimitSeconds { get; }

    /// <summary>The token of the stage that made the budget, checked by <see cref="Spend"/>.</summary>
    public CancellationToken CancellationToken { get; }

    /// <summary>Iterations spent so far.</summary>
    public int Used { get; private set; }

    /// <summary>Null while work may go on; otherwise which limit was reached, in words.</summary>
    public string? Exhausted { get; private set; }

    /// <summary>CPU seconds of the calling thread since the budget was made.</summary>
    public double CpuSeconds => ThreadCpuSeconds() - _cpuStart;

    /// <summary>Counts <paramref name="iterations"/>; false (and <see cref="Exhausted"/> set) when a limit is reached.</summary>
    /// <exception cref="OperationCanceledException"><see cref="CancellationToken"/> was cancelled.</exception>
    public bool Spend(int iterations = 1)
    {
        CancellationToken.ThrowIfCancellationRequested();
        if (Exhausted is not null) return false;
        Used += iterations;
        if (Used > IterationLimit)
        {
            Exhausted = $"the iteration budget ({IterationLimit}) was used up";
            return false;
        }

        if (double.IsFinite(CpuLimitSeconds) && CpuLimitSeconds > 0 && CpuSeconds > CpuLimitSeconds)
        {
            Exhausted = $"the CPU-time budget ({CpuLimitSeconds:G3} s) was used up";
            return false;
        }

        return true;
    }

    /// <summary>Passes a progress line on (with the iterations spent), at most about once a second unless <paramref name="force"/>.</summary>
    public void Report(string message, bool force = false)
    {
        if (_progress is null) return;
        var now = _clock.Elapsed.TotalSeconds;
        if (!force && now - _lastReport < 1) return;
        _lastReport = now;
        _progress.Report($"{message} ({Used} iterations)");
    }

    /// <summary>CPU time of the calling thread (Linux: clock_gettime(CLOCK_THREAD_CPUTIME_ID); elsewhere the process's).</summary>
    public static double ThreadCpuSeconds()
    {
        if (OperatingSystem.IsLinux())
        {
            try
            {
                if (clock_gettime(3, out var ts) == 0) return ts.Seconds + 1e-9 * ts.Nanoseconds;
            }
            catch (Exception e) when (e is DllNotFoundException or EntryPointNotFoundException)
            {
                // fall through
            }
        }

        return System.Diagnostics.Process.GetCurrentProcess().TotalProcessorTime.TotalSeconds;
    }

    [System.Runtime.InteropServices.StructLayout(System.Runtime.InteropServices.LayoutKind.Sequential)]
    private struct TimeSpec
    {
        public long Seconds;
        public long Nanoseconds;
    }

    [System.Runtime.InteropServices.DllImport("libc", EntryPoint = "clock_gettime")]
    private static extern int clock_gettime(int clock, out TimeSpec time);
}
