namespace OrderUnfold;

/// <summary>
/// The cancellation token of the current run (Ctrl-C, SIGTERM, a caller's timeout), visible to the long loops of
/// reading, solving and refining without threading a parameter through every signature: the command line (or a
/// library caller) sets it with <see cref="Use"/>, and loop heads call <see cref="ThrowIfRequested"/>. It flows
/// into tasks and threads started from the run (an <see cref="AsyncLocal{T}"/>).
/// </summary>
public static class Cancellation
{
    private static readonly AsyncLocal<CancellationToken> Ambient = new();

    /// <summary>The token of the current run (<see cref="CancellationToken.None"/> outside any scope).</summary>
    public static CancellationToken Token => Ambient.Value;

    /// <summary>Throws <see cref="OperationCanceledException"/> when the current run has been cancelled.</summary>
    public static void ThrowIfRequested() => Ambient.Value.ThrowIfCancellationRequested();

    /// <summary>Makes <paramref name="token"/> the current run's token until the returned scope is disposed.</summary>
    public static IDisposable Use(CancellationToken token)
    {
        var previous = Ambient.Value;
        Ambient.Value = token;
        return new Scope(previous);
    }

    private sealed class Scope(CancellationToken previous) : IDisposable
    {
        public void Dispose() => Ambient.Value = previous;
    }
}
