using System.CommandLine;
using OrderUnfold.Calibration;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using OrderUnfold.Plotting;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold calibrate SETUP --out DIR</c>: calibrate the axes and instruments without (or before) unfolding.</summary>
internal sealed class CalibrateCommand : VerbCommand
{
    private readonly Argument<string> _setup = PathArgument("SETUP", "setup file (TOML; see docs/setup.md)");
    private readonly Option<string?> _out = SharedOptions.Out("calibrate-out next to the setup");
    private readonly Option<SelfCalibrationMode?> _selfCalibrate = ValueOptions.Choice("--self-calibrate",
        "calibrate from the source sweeps themselves: when needed, always or never (default: the setup's self_calibrate)",
        ("auto", SelfCalibrationMode.Auto), ("always", SelfCalibrationMode.Always), ("never", SelfCalibrationMode.Never));
    private readonly Option<double?> _knownInterval = ValueOptions.Quantity("--known-interval", Dimension.Frequency, "FREQ",
        "a known interval between two lines of the source, to refine the FSRs against", positive: true);
    private readonly Option<bool> _refineFsr = ValueOptions.Flag("--refine-fsr", "refine the FSRs from a trial unfold");
    private readonly Option<bool> _noPlots = SharedOptions.NoPlots();
    private readonly Option<bool> _quiet = SharedOptions.Quiet();

    public CalibrateCommand(CliContext cli)
        : base("calibrate", "calibrate sweep axes and instruments (also from the sweeps themselves) and save the calibration", cli)
    {
        Add(_setup);
        AddOptions([_out, _selfCalibrate, _knownInterval, _refineFsr, _noPlots, _quiet]);
    }

    public override string Details => """
        Calibrates every sweep axis SETUP needs: from its [[calibration]] sweeps, and, where an instrument or
        ramp direction has none (or one with too few peaks), from the source sweep itself (every feature
        repeats one FSR later). Fits the finesse to isolated peaks, looks for transverse-mode peaks, and with
        --refine-fsr or --known-interval (or refine_fsr / known_interval in [solve]) refines the FSRs from a
        trial unfold. Writes into DIR:
          calibration.json          axes and instruments, reusable for later sweeps of the same session
          calibration-report.json   per axis: method, pairs, residual RMS (Hz and linewidths), axis
                                    uncertainty, finesse ± sigma, peak shape, transverse modes; FSR refinement
          axis-*.png                axis polynomial with its calibration points and residuals (MHz)
          finesse-*.png             Airy fit over one peak;  profile-*.png  averaged peak against Airy
        Options override the [solve] keys of the same name. Exit codes: 0 success, 2 bad input.
        """;

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        var setupPath = parse.GetValue(_setup)!;
        var outDir = parse.GetValue(_out) ?? Path.Combine(Path.GetDirectoryName(Path.GetFullPath(setupPath)) ?? ".", "calibrate-out");
        var setup = SetupReader.Read(setupPath);
        setup = setup with
        {
            Solve = setup.Solve with
            {
                SelfCalibrate = parse.GetValue(_selfCalibrate) ?? setup.Solve.SelfCalibrate,
                KnownIntervalHz = parse.GetValue(_knownInterval) ?? setup.Solve.KnownIntervalHz,
                RefineFsr = parse.GetValue(_refineFsr) || setup.Solve.RefineFsr,
            },
        };
        var progress = new StderrProgress(Error, parse.GetValue(_quiet));
        var set = UnfoldPipeline.Calibrate(setup, progress, out var calibrationWarnings, cancellationToken);
        var warnings = calibrationWarnings.ToList();
        FsrRefinement? fsr = null;
        if (setup.Solve.RefineFsr || setup.Solve.KnownIntervalHz is not null)
        {
            // a trial unfold on this calibration, without the line refinement, gives the lines the FSRs are refined from
            var trial = UnfoldPipeline.Run(setup with { Solve = setup.Solve with { Refine = false } }, progress, set, cancellationToken);
            fsr = trial.FsrRefinement;
            set = new CalibrationSet(trial.Instruments, trial.Calibrations, set.Source);
            warnings.AddRange(trial.Warnings.Where(w => !warnings.Contains(w)));
        }

        var stated = setup.Instruments.Select(i => i.ToInstrument()).ToList();
        IReadOnlyList<string> plots;
        using (var staged = StagedFolder.Create(outDir)) // complete or absent (Io/StagedFolder.cs)
        {
            CalibrationFile.Write(Path.Combine(staged.Path, CalibrationReport.CalibrationFileName), set);
            plots = parse.GetValue(_noPlots) ? [] : CalibrationPlots.Write(set.Axes, staged.Path);
            CalibrationReport.Write(Path.Combine(staged.Path, CalibrationReport.FileName), CalibrationReport.Build(set, stated, warnings, fsr, Cli.Version));
            staged.Publish(CalibrationReport.FileName, cancellationToken);
        }

        PrintCalibration(set, fsr);
        foreach (var w in warnings) Out.WriteLine($"warning: {w}");
        Out.WriteLine($"outputs: {Path.GetFullPath(outDir)} ({2 + plots.Count} files)");
        return ExitCodes.Ok;
    }

    private void PrintCalibration(CalibrationSet set, FsrRefinement? fsr)
    {
        foreach (var i in set.Instruments) Out.WriteLine($"instrument {i}");
        foreach (var c in set.Axes)
        {
            var lw = set.Instruments.FirstOrDefault(i => i.Name == c.Instrument)?.LinewidthHz ?? double.NaN;
            Out.WriteLine($"axis {c.Instrument} ({c.Direction.ToString().ToLowerInvariant()}) from {c.Source}: {c.Method}; degree {c.Axis.Degree}, " +
                          $"residual RMS {Quantity.FormatFrequency(c.ResidualRmsHz, 3)} ({c.ResidualRmsHz / lw:F3} linewidths)" +
                          (c.AxisSigmaHz is double s ? $", axis uncertainty {Quantity.FormatFrequency(s, 3)}" : "") +
                          (c.Finesse is double f ? $", finesse {f:F1}" + (c.FinesseSigma is double fs ? $" ± {fs:F1}" : "") : ""));
        }

        if (fsr is null) return;
        foreach (var s in fsr.Instruments)
            Out.WriteLine($"FSR {s.Instrument}: {Quantity.FormatFrequency(s.NominalFsrHz, 8)} -> {Quantity.FormatFrequency(s.RefinedFsrHz, 8)} ± {Quantity.FormatFrequency(s.SigmaHz, 2)} ({100 * s.RelativeChange:+0.0000;-0.0000} %, {s.Basis})");
        Out.WriteLine($"lines moved by up to {Quantity.FormatFrequency(fsr.MaxLineShiftHz, 3)}; reduced χ² {fsr.ReducedChiSquareBefore:F2} -> {fsr.ReducedChiSquareAfter:F2}");
        foreach (var n in fsr.Notes) Out.WriteLine($"note: {n}");
    }
}
