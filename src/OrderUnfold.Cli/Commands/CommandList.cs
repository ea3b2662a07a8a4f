namespace OrderUnfold.Cli.Commands;

/// <summary>The commands, in the order the help lists them. Add a new command here.</summary>
public static class CommandList
{
    public static IReadOnlyList<ICommand> All() =>
    [
        new DemoCommand(),
        new UnfoldCommand(),
        new InitCommand(),
        new SimulateCommand(),
        new BatchCommand(),
        new MergeCommand(),
        new TrackCommand(),
        new SimulateArchiveCommand(),
    ];
}
