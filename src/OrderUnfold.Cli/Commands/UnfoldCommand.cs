using OrderUnfold.Plotting;
using OrderUnfold.Pipeline;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold unfold SETUP --out DIR</c>.</summary>
public sealed class UnfoldCommand : ICommand
{
    public string Name => "unfold";
    public string Summary => "solve for the spectrum from the sweeps a setup file names";

    public string Usage => """
        orderunfold unfold SETUP [--out DIR] [--calibration FILE] [--no-plots] [--quiet]

        Reads SETUP (TOML; see docs/setup.md), calibrates each sweep axis, solves for the spectrum on one
        frequency grid from all sweeps, and writes into DIR (default: unfold-out next to the setup):
          report.json   inputs with hashes, instruments, calibrations, fit quality, lines, warnings
          lines.csv     one row per line: frequency_hz (relative to the strongest line), intensity, ...
          spectrum.csv  the frequency grid and recovered intensity
          *.png         each sweep with the model and residuals, the spectrum, the axis calibrations
        --calibration FILE reuses a calibration written by 'orderunfold calibrate' (the setup's calibration
        sweeps are then not read). --quiet prints no progress and a one-line summary instead of the table.
        The outputs appear together once complete (never a half-written folder). Files named in SETUP are
        read from its folder and below unless --allow-outside-paths is given.
        Exit code 0 on success, 2 on bad input, 130/143 when stopped by Ctrl-C/SIGTERM.
        """;

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args, ["out", "calibration"], ["no-plots", "quiet"]);
        var setup = a.Positional(0, "SETUP (a setup .toml file)");
        a.NoMorePositionals(1);
        var outDir = a.Value("out") ?? Path.Combine(Path.GetDirectoryName(Path.GetFullPath(setup)) ?? ".", "unfold-out");
        var reuse = a.Value("calibration") is string cal ? SavedCalibration.Read(cal) : null;
        var run = UnfoldPipeline.Run(setup, new StderrProgress(stderr, a.Flag("quiet")), reuse);
        // outputs are complete or absent: written into a staging folder, published by rename (Io/StagedFolder.cs)
        using (var staged = Io.StagedFolder.Create(outDir))
        {
            UnfoldOutputs.Write(run, staged.Path, figures: a.Flag("no-plots") ? null : new FigureWriter(), toolVersion: Cli.Version);
            staged.Publish(OutputNames.Report);
        }

        if (a.Flag("quiet")) Commands.Summary.UnfoldBrief(run, stdout);
        else Commands.Summary.Unfold(run, stdout);
        stdout.WriteLine($"outputs: {Path.GetFullPath(outDir)}");
        return ExitCodes.Ok;
    }
}
