using System.Runtime.InteropServices;
using OrderUnfold;
using OrderUnfold.Cli;
using OrderUnfold.Cli.Commands;
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
        Thread.Sleep(OrderUnfold.Cli.Cli.ForcedExitAfter);
        StagedFolder.RemoveUnpublished();
        Environment.Exit(signalExit);
    }) { IsBackground = true, Name = "orderunfold forced exit" };
    watchdog.Start();
}

using var onInt = PosixSignalRegistration.Create(PosixSignal.SIGINT, OnSignal);
using var onTerm = PosixSignalRegistration.Create(PosixSignal.SIGTERM, OnSignal);
var exit = OrderUnfold.Cli.Cli.Run(args, Console.Out, Console.Error, cancel.Token);
return exit == ExitCodes.Interrupted && signalExit != 0 ? signalExit : exit;

namespace OrderUnfold.Cli
{
    /// <summary>Wires the commands; decides the exit code for errors in one place.</summary>
    public static class Cli
    {
        public static IReadOnlyList<ICommand> Commands { get; } = CommandList.All();

        /// <summary>How long a cancelled run may take to stop before the process is made to exit.</summary>
        public static readonly TimeSpan ForcedExitAfter = TimeSpan.FromSeconds(3);

        /// <summary>Options every command accepts (input limits and path confinement; see Io/InputLimits.cs).</summary>
        public static readonly string[] GlobalValueOptions = ["max-file-size", "max-line-length"];

        /// <summary>Flags every command accepts.</summary>
        public static readonly string[] GlobalFlags = ["allow-outside-paths"];

        public static int Run(IReadOnlyList<string> argv, TextWriter stdout, TextWriter stderr, CancellationToken cancel = default)
        {
            InputLimits limits;
            string[] args;
            try
            {
                (args, limits) = GlobalOptions(argv);
            }
            catch (UsageException e)
            {
                stderr.WriteLine($"orderunfold {e.Message}");
                return ExitCodes.BadInput;
            }

            using var limitScope = InputLimits.Use(limits);
            using var cancelScope = Cancellation.Use(cancel);
            try
            {
                return Dispatch(args, stdout, stderr);
            }
            catch (Exception e) when (cancel.IsCancellationRequested && IsCancellation(e))
            {
                stderr.WriteLine("orderunfold: stopped; no partial output was published");
                return ExitCodes.Interrupted;
            }
        }

        private static bool IsCancellation(Exception e) =>
            e is OperationCanceledException || (e is AggregateException a && a.Flatten().InnerExceptions.All(i => i is OperationCanceledException));

        /// <summary>Takes the global options out of the arguments (anywhere after the command).</summary>
        private static (string[] Arguments, InputLimits Limits) GlobalOptions(IReadOnlyList<string> argv)
        {
            var rest = new List<string>();
            var limits = InputLimits.Default;
            for (var i = 0; i < argv.Count; i++)
            {
                var a = argv[i];
                var eq = a.IndexOf('=');
                var name = a.StartsWith("--", StringComparison.Ordinal) ? (eq > 0 ? a[2..eq] : a[2..]) : null;
                if (i == 0 || name is null || !(GlobalValueOptions.Contains(name) || GlobalFlags.Contains(name)))
                {
                    rest.Add(a);
                    continue;
                }

                if (GlobalFlags.Contains(name))
                {
                    if (eq > 0) throw new UsageException($"--{name} is a flag and takes no value");
                    limits = limits with { AllowOutsidePaths = true };
                    continue;
                }

                var value = eq > 0 ? a[(eq + 1)..] : i + 1 < argv.Count ? argv[++i] : throw new UsageException($"--{name} needs a value");
                if (name == "max-file-size")
                {
                    limits = limits with { MaxFileBytes = InputLimits.ParseBytes(value) ?? throw new UsageException($"--max-file-size expects a size such as \"512 MiB\" or \"2 GB\" but got '{InputLimits.Clip(value)}'") };
                }
                else
                {
                    if (!int.TryParse(value, System.Globalization.NumberStyles.Integer, System.Globalization.CultureInfo.InvariantCulture, out var n) || n < 80)
                        throw new UsageException($"--max-line-length expects a whole number of characters ≥ 80 but got '{InputLimits.Clip(value)}'");
                    limits = limits with { MaxLineChars = n };
                }
            }

            return (rest.ToArray(), limits);
        }

        private static int Dispatch(string[] args, TextWriter stdout, TextWriter stderr)
        {
            if (args.Length == 0 || args[0] is "-h" or "--help" or "help" && args.Length == 1)
            {
                PrintHelp(stdout);
                return args.Length == 0 ? ExitCodes.BadInput : ExitCodes.Ok;
            }

            if (args[0] is "--version")
            {
                stdout.WriteLine($"orderunfold {Version}");
                return ExitCodes.Ok;
            }

            if (args[0] == "help")
            {
                var c = Commands.FirstOrDefault(c => c.Name == args[1]);
                if (c is null)
                {
                    stderr.WriteLine($"orderunfold: unknown command '{args[1]}'");
                    return ExitCodes.BadInput;
                }

                stdout.WriteLine(c.Usage);
                return ExitCodes.Ok;
            }

            var command = Commands.FirstOrDefault(c => c.Name == args[0]);
            if (command is null)
            {
                stderr.WriteLine($"orderunfold: unknown command '{args[0]}'; commands: {string.Join(", ", Commands.Select(c => c.Name))}");
                return ExitCodes.BadInput;
            }

            var rest = args[1..];
            if (rest.Any(a => a is "-h" or "--help"))
            {
                stdout.WriteLine(command.Usage);
                return ExitCodes.Ok;
            }

            try
            {
                return command.Run(rest, stdout, stderr);
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException or InputException && Cancellation.Token.IsCancellationRequested)
            {
                // a file vanished under a stopping run (its staging folder is being removed): that is the stop, not bad input
                throw new OperationCanceledException("stopped", e, Cancellation.Token);
            }
            catch (UsageException e)
            {
                stderr.WriteLine($"orderunfold {e.Message}");
                stderr.WriteLine($"(see '{Hint.Command("help " + command.Name)}')");
                return ExitCodes.BadInput;
            }
            catch (InputException e)
            {
                stderr.WriteLine(e.Located);
                return ExitCodes.BadInput;
            }
            catch (IOException e)
            {
                stderr.WriteLine($"orderunfold {command.Name}: {e.Message}");
                return ExitCodes.BadInput;
            }
            catch (UnauthorizedAccessException e)
            {
                stderr.WriteLine($"orderunfold {command.Name}: {e.Message}");
                return ExitCodes.BadInput;
            }
        }

        public static string Version =>
            typeof(InputException).Assembly.GetName().Version?.ToString(3) ?? "0.0.0";

        private static void PrintHelp(TextWriter o)
        {
            o.WriteLine("orderunfold: unfold overlapping orders of scanning Fabry–Pérot cavity sweeps.");
            o.WriteLine();
            o.WriteLine("Commands:");
            foreach (var c in Commands) o.WriteLine($"  {c.Name,-10} {c.Summary}");
            o.WriteLine();
            o.WriteLine("'orderunfold help COMMAND' shows a command's options.");
            o.WriteLine();
            o.WriteLine("Options of every command (see README, 'Limits'):");
            o.WriteLine($"  --max-file-size SIZE     largest input file read (default {InputLimits.FormatBytes(InputLimits.Default.MaxFileBytes)})");
            o.WriteLine($"  --max-line-length N      longest line of a text input, in characters (default {InputLimits.Default.MaxLineChars})");
            o.WriteLine("  --allow-outside-paths    let setups and manifests name files outside their own folder");
            o.WriteLine("Exit codes: 0 ok, 1 some items or a requirement failed, 2 bad input, 130 interrupted (Ctrl-C), 143 terminated (SIGTERM).");
        }
    }
}
