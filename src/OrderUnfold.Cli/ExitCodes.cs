namespace OrderUnfold.Cli;

/// <summary>Exit codes, decided in one place.</summary>
public static class ExitCodes
{
    public const int Ok = 0;

    /// <summary>Ran, but some items failed or a stated requirement was not met.</summary>
    public const int SomeFailed = 1;

    /// <summary>Usage or input error: nothing useful was produced.</summary>
    public const int BadInput = 2;

    /// <summary>Stopped by Ctrl-C (SIGINT): 128 + 2, as shells report it. Nothing partial is published.</summary>
    public const int Interrupted = 130;

    /// <summary>Stopped by SIGTERM: 128 + 15. Nothing partial is published.</summary>
    public const int Terminated = 143;
}
