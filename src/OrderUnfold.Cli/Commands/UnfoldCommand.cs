using System.CommandLine;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Pipeline;
using OrderUnfold.Plotting;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold unfold SETUP --out DIR</c>.</summary>
internal sealed class UnfoldCommand : VerbCommand
{
    private readonly Argument<string> _setup = PathArgument("SETUP", "setup file (TOML; see docs/setup.md)");
    private readonly Option<string?> _out = SharedOptions.Out("unfold-out next to the setup");
    private readonly Option<string?> _calibration = SharedOptions.Calibration(
        "reuse a calibration written by 'calibrate' (the setup's calibration sweeps are then not read)");
    private readonly Option<bool> _noPlots = SharedOptions.NoPlots();
    private readonly Option<bool> _quiet = SharedOptions.Quiet("; a one-line summary instead of the table of lines");

    public UnfoldCommand(CliContext cli) : base("unfold", "solve for the spectrum from the sweeps a setup file names", cli)
    {
        Add(_setup);
        AddOptions([_out, _calibration, _noPlots, _quiet]);
    }

    public override string Details => """
        Reads SETUP, calibrates each sweep axis, solves for the spectrum on one frequency grid from all sweeps,
        and writes into DIR:
          report.json   inputs with hashes, instruments, calibrations, fit quality, lines, warnings
          lines.csv     one row per line: frequency_hz (relative to the strongest line), intensity, ...
          spectrum.csv  the frequency grid and recovered intensity
          *.png         each sweep with the model and residuals, the spectrum, the axis calibrations
        The outputs appear together once complete (never a half-written folder). Files named in SETUP are
        read from its folder and below unless --allow-outside-paths is given.
        Exit codes: 0 success, 2 bad input, 130/143 when stopped by Ctrl-C/SIGTERM.
        """;

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        var setup = parse.GetValue(_setup)!;
        var quiet = parse.GetValue(_quiet);
        var outDir = parse.GetValue(_out) ?? Path.Combine(Path.GetDirectoryName(Path.GetFullPath(setup)) ?? ".", "unfold-out");
        var reuse = parse.GetValue(_calibration) is string calibration ? SavedCalibration.Read(calibration) : null;
        var run = UnfoldPipeline.Run(setup, new StderrProgress(Error, quiet), reuse, cancellationToken);
        // outputs are complete or absent: written into a staging folder, published by rename (Io/StagedFolder.cs)
        using (var staged = Io.StagedFolder.Create(outDir))
        {
            UnfoldOutputs.Write(run, staged.Path, figures: parse.GetValue(_noPlots) ? null : new FigureWriter(), toolVersion: Cli.Version);
            staged.Publish(OutputNames.Report, cancellationToken);
        }

        if (quiet) Summary.UnfoldBrief(run, Out);
        else Summary.Unfold(run, Out);
        Out.WriteLine($"outputs: {Path.GetFullPath(outDir)}");
        return ExitCodes.Ok;
    }
}
