using OrderUnfold;
using OrderUnfold.Cli;
using OrderUnfold.Cli.Commands;

return OrderUnfold.Cli.Cli.Run(args, Console.Out, Console.Error);

namespace OrderUnfold.Cli
{
    /// <summary>Wires the commands; decides the exit code for errors in one place.</summary>
    public static class Cli
    {
        public static IReadOnlyList<ICommand> Commands { get; } = CommandList.All();

        public static int Run(IReadOnlyList<string> argv, TextWriter stdout, TextWriter stderr)
        {
            var args = argv.ToArray();
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
            catch (UsageException e)
            {
                stderr.WriteLine($"orderunfold {e.Message}");
                stderr.WriteLine($"(see 'orderunfold help {command.Name}')");
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
        }
    }
}
