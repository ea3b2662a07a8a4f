namespace OrderUnfold.Cli.Commands;

/// <summary>The commands, in the order the help lists them. Add a new command here.</summary>
public static class CommandList
{
    public static IReadOnlyList<ICommand> All() =>
    [
        new DemoCommand(),
        new UnfoldCommand(),
        new CalibrateCommand(),
        new InitCommand(),
        new SimulateCommand(),
    ];
}
