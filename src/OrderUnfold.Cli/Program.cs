using System.Runtime.InteropServices;
using OrderUnfold.Cli;
using OrderUnfold.Io;

// Ctrl-C (SIGINT) and SIGTERM cancel the run's token: every command stops within a few seconds, publishes nothing
// partial, and exits with 130 (SIGINT) or 143 (SIGTERM). Loops that do not reach a cancellation check in time are
// cut short by a forced exit after ForcedExitAfter, which first removes this process's unpublished staging folders.
using var cancel = new CancellationTokenSource();
var signalExit = 0;
void OnSignal(PosixSignalContext context)
{
    context.Cancel = true;
    var code = context.Signal == PosixSignal.SIGTERM ? ExitCodes.Terminated : ExitCodes.Interrupted;
    if (Interlocked.CompareExchange(ref signalExit, code, 0) != 0)
    {
        StagedFolder.RemoveUnpublished(); // a second signal stops at once
        Environment.Exit(signalExit);
    }

    Console.Error.WriteLine();
    Console.Error.WriteLine($"orderunfold: {(code == ExitCodes.Terminated ? "terminated" : "interrupted")}; stopping (outputs not yet complete are not written)");
    cancel.Cancel();
    var watchdog = new Thread(() =>
    {
        Thread.Sleep(Cli.ForcedExitAfter);
        StagedFolder.RemoveUnpublished();
        Environment.Exit(signalExit);
    }) { IsBackground = true, Name = "orderunfold forced exit" };
    watchdog.Start();
}

using var onInt = PosixSignalRegistration.Create(PosixSignal.SIGINT, OnSignal);
using var onTerm = PosixSignalRegistration.Create(PosixSignal.SIGTERM, OnSignal);
var exit = Cli.Run(args, Console.Out, Console.Error, cancel.Token);
return exit == ExitCodes.Interrupted && signalExit != 0 ? signalExit : exit;
