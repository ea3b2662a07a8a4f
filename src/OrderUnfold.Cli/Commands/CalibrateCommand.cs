using OrderUnfold.Calibration;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using OrderUnfold.Plotting;
using OrderUnfold.Units;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold calibrate SETUP --out DIR</c>: calibrate the axes and instruments without (or before) unfolding.</summary>
public sealed class CalibrateCommand : ICommand
{
    public string Name => "calibrate";
    public string Summary => "calibrate sweep axes and instruments (also from the sweeps themselves) and save the calibration";

    public string Usage => """
        orderunfold calibrate SETUP [--out DIR] [--self-calibrate auto|always|never] [--known-interval FREQ]
                                    [--refine-fsr] [--no-plots] [--quiet]

        Calibrates every sweep axis SETUP needs: from its [[calibration]] sweeps, and, where an instrument or
        ramp direction has none (or one with too few peaks), from the source sweep itself (every feature
        repeats one FSR later). Fits the finesse to isolated peaks, looks for transverse-mode peaks, and with
        --refine-fsr or --known-interval (or refine_fsr / known_interval in [solve]) refines the FSRs from a
        trial unfold. Writes into DIR (default: calibrate-out next to the setup):
          calibration.json          axes and instruments, reusable for later sweeps of the same session
          calibration-report.json   per axis: method, pairs, residual RMS (Hz and linewidths), axis
                                    uncertainty, finesse ± sigma, peak shape, transverse modes; FSR refinement
          axis-*.png                axis polynomial with its calibration points and residuals (MHz)
          finesse-*.png             Airy fit over one peak;  profile-*.png  averaged peak against Airy
        Options override the [solve] keys of the same name. Exit code 0 on success, 2 on bad input.
        """;

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args, ["out", "self-calibrate", "known-interval"], ["refine-fsr", "no-plots", "quiet"]);
        var setupPath = a.Positional(0, "SETUP (a setup .toml file)");
        a.NoMorePositionals(1);
        var outDir = a.Value("out") ?? Path.Combine(Path.GetDirectoryName(Path.GetFullPath(setupPath)) ?? ".", "calibrate-out");
        var mode = a.Value("self-calibrate")?.ToLowerInvariant() switch
        {
            null => (SelfCalibrationMode?)null,
            "auto" => SelfCalibrationMode.Auto,
            "always" => SelfCalibrationMode.Always,
            "never" => SelfCalibrationMode.Never,
            var v => throw new UsageException($"calibrate: --self-calibrate expects auto, always or never but got '{v}'"),
        };
        var known = a.Quantity("known-interval", Dimension.Frequency);
        if (known is <= 0) throw new UsageException($"calibrate: --known-interval must be a positive frequency but got '{a.Value("known-interval")}'");

        var setup = SetupReader.Read(setupPath);
        setup = setup with
        {
            Solve = setup.Solve with
            {
                SelfCalibrate = mode ?? setup.Solve.SelfCalibrate,
                KnownIntervalHz = known ?? setup.Solve.KnownIntervalHz,
                RefineFsr = a.Flag("refine-fsr") || setup.Solve.RefineFsr,
            },
        };
        var progress = new StderrProgress(stderr, a.Flag("quiet"));
        var set = UnfoldPipeline.Calibrate(setup, progress, out var warnings);
        var allWarnings = warnings.ToList();
        FsrRefinement? fsr = null;
        if (setup.Solve.RefineFsr || setup.Solve.KnownIntervalHz is not null)
        {
            // a trial unfold on this calibration, without the line refinement, gives the lines the FSRs are refined from
            var trial = UnfoldPipeline.Run(setup with { Solve = setup.Solve with { Refine = false } }, progress, set);
            fsr = trial.FsrRefinement;
            set = new CalibrationSet(trial.Instruments, trial.Calibrations, set.Source);
            allWarnings.AddRange(trial.Warnings.Where(w => !allWarnings.Contains(w)));
        }

        var stated = setup.Instruments.Select(i => i.ToInstrument()).ToList();
        IReadOnlyList<string> plots;
        using (var staged = StagedFolder.Create(outDir)) // complete or absent (Io/StagedFolder.cs)
        {
            CalibrationFile.Write(Path.Combine(staged.Path, CalibrationReport.CalibrationFileName), set);
            plots = a.Flag("no-plots") ? [] : CalibrationPlots.Write(set.Axes, staged.Path);
            CalibrationReport.Write(Path.Combine(staged.Path, CalibrationReport.FileName), CalibrationReport.Build(set, stated, allWarnings, fsr, Cli.Version));
            staged.Publish(CalibrationReport.FileName);
        }


        foreach (var i in set.Instruments) stdout.WriteLine($"instrument {i}");
        foreach (var c in set.Axes)
        {
            var lw = set.Instruments.FirstOrDefault(i => i.Name == c.Instrument)?.LinewidthHz ?? double.NaN;
            stdout.WriteLine($"axis {c.Instrument} ({c.Direction.ToString().ToLowerInvariant()}) from {c.Source}: {c.Method}; degree {c.Axis.Degree}, " +
                             $"residual RMS {Quantity.FormatFrequency(c.ResidualRmsHz, 3)} ({c.ResidualRmsHz / lw:F3} linewidths)" +
                             (c.AxisSigmaHz is double s ? $", axis uncertainty {Quantity.FormatFrequency(s, 3)}" : "") +
                             (c.Finesse is double f ? $", finesse {f:F1}" + (c.FinesseSigma is double fs ? $" ± {fs:F1}" : "") : ""));
        }

        if (fsr is not null)
        {
            foreach (var s in fsr.Instruments)
                stdout.WriteLine($"FSR {s.Instrument}: {Quantity.FormatFrequency(s.NominalFsrHz, 8)} -> {Quantity.FormatFrequency(s.RefinedFsrHz, 8)} ± {Quantity.FormatFrequency(s.SigmaHz, 2)} ({100 * s.RelativeChange:+0.0000;-0.0000} %, {s.Basis})");
            stdout.WriteLine($"lines moved by up to {Quantity.FormatFrequency(fsr.MaxLineShiftHz, 3)}; reduced χ² {fsr.ReducedChiSquareBefore:F2} -> {fsr.ReducedChiSquareAfter:F2}");
            foreach (var n in fsr.Notes) stdout.WriteLine($"note: {n}");
        }

        foreach (var w in allWarnings) stdout.WriteLine($"warning: {w}");
        stdout.WriteLine($"outputs: {Path.GetFullPath(outDir)} ({2 + plots.Count} files)");
        return ExitCodes.Ok;
    }
}
