namespace OrderUnfold.Cli.Commands;

/// <summary>The commands, in the order the help lists them. Add a new command here.</summary>
public static class CommandList
{
    public static IReadOnlyList<ICommand> All()
    {
        // 'modes SETUP.toml' runs the unfold first
        ModesCommand.UnfoldSetup ??= path => Pipeline.ModeInputs.FromRun(Pipeline.UnfoldPipeline.Run(path));
        return
    [
        new DemoCommand(),
        new UnfoldCommand(),
        new CalibrateCommand(),
        new InitCommand(),
        new SimulateCommand(),
        new PlanCommand(),
        new ModesCommand(),
        new BatchCommand(),
        new MergeCommand(),
        new TrackCommand(),
        new SimulateArchiveCommand(),
    ];
    }
}
