using System.CommandLine;
using System.Globalization;
using OrderUnfold.Analysis.Modes;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Plotting;

namespace OrderUnfold.Cli.Commands;

/// <summary>
/// <c>orderunfold modes SETUP|RESULT_DIR</c>: longitudinal-mode analysis of a laser (spacing, count, SMSR,
/// envelope) with an optional pass/fail verdict for a test station.
/// </summary>
internal sealed class ModesCommand : VerbCommand
{
    /// <summary>Output folder used for a setup file when --out is not given.</summary>
    public const string DefaultSetupOutput = "modes-out";

    private readonly Argument<string> _target = PathArgument("SETUP.toml|RESULT_DIR", "a folder written by 'unfold' (lines.csv, report.json), or a setup file to unfold first");
    private readonly Option<string?> _out = SharedOptions.Out($"RESULT_DIR, or ./{DefaultSetupOutput} for a setup");
    private readonly Option<double?> _within = ValueOptions.Quantity("--within", Dimension.Decibel, "LEVEL", "count lines within this level of the strongest (default 20dB)", positive: true);
    private readonly Option<double?> _groupIndex = ValueOptions.Number("--group-index", "N", "group index of the laser medium: also report the physical length", positive: true);
    private readonly Option<double?> _requireSmsr = ValueOptions.Quantity("--require-smsr", Dimension.Decibel, "LEVEL", "PASS only if the SMSR is at least this (e.g. 30dB)");
    private readonly Option<int?> _requireMaxModes = ValueOptions.WholeNumber("--require-max-modes", "N", "PASS only if at most N lines lie within the --within level", min: 1);
    private readonly Option<int?> _minModesForComb = ValueOptions.WholeNumber("--min-modes-for-comb", "N", "fewest lines that count as a comb (default 2)", min: 2);
    private readonly Option<double?> _combTolerance = ValueOptions.Create<double>("--comb-tolerance", "X",
        "comb membership tolerance as a fraction of the spacing (default 0.02)", (string text, out double value, out string problem) =>
        {
            var ok = double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out value) && value > 0 && value <= 0.25;
            problem = ok ? "" : $"expects a fraction in (0, 0.25] but got '{InputException.Clip(text)}'";
            return ok;
        });
    private readonly Option<double?> _spacingMin = ValueOptions.Quantity("--spacing-min", Dimension.Frequency, "FREQ", "one cavity only: the laser's spacing is known to be at least this", positive: true);
    private readonly Option<double?> _spacingMax = ValueOptions.Quantity("--spacing-max", Dimension.Frequency, "FREQ", "one cavity only: the laser's spacing is known to be at most this", positive: true);
    private readonly Option<bool> _noPlots = SharedOptions.NoPlots("do not draw modes.png");

    public ModesCommand(CliContext cli) : base("modes", "laser modes: spacing, count, side-mode suppression, envelope; PASS/FAIL", cli)
    {
        Add(_target);
        AddOptions([_out, _within, _groupIndex, _requireSmsr, _requireMaxModes, _minModesForComb, _combTolerance, _spacingMin, _spacingMax, _noPlots]);
    }

    public override string Details => """
        Longitudinal modes of a laser from an unfolded line list: fits a comb ν0 + k·Δ (robust to missing
        modes, spurious lines and a second mode family), gives the mode spacing Δ and the laser's optical
        length c/(2Δ), the number of lines within a level of the strongest, the side-mode suppression ratio
        (SMSR) and the gain envelope. With SETUP.toml the unfold runs first. Writes modes.json, modes.csv and
        modes.png to the output folder.
        Exit codes: 0 PASS (or no requirement stated), 1 FAIL of a stated requirement, 2 bad input.
        """;

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        var options = new ModeAnalysisOptions
        {
            WithinDb = parse.GetValue(_within) ?? 20,
            GroupIndex = parse.GetValue(_groupIndex),
            MinModesForComb = parse.GetValue(_minModesForComb) ?? 2,
            CombToleranceFraction = parse.GetValue(_combTolerance) ?? 0.02,
            SpacingMinHz = parse.GetValue(_spacingMin),
            SpacingMaxHz = parse.GetValue(_spacingMax),
        };
        if (options.SpacingMinHz is { } lo && options.SpacingMaxHz is { } hi && lo >= hi)
            throw new UsageException($"--spacing-min ({Quantity.FormatFrequency(lo)}) must be below --spacing-max ({Quantity.FormatFrequency(hi)})");
        var requirements = new ModeRequirements(parse.GetValue(_requireSmsr), parse.GetValue(_requireMaxModes));
        var (input, source, defaultOut) = ReadInput(parse.GetValue(_target)!, cancellationToken);
        var outDir = parse.GetValue(_out) ?? defaultOut;

        var analysis = LaserModes.Analyse(input, options);
        var verdict = ModeCheck.Check(analysis, requirements);
        Directory.CreateDirectory(outDir);
        ModeOutputs.WriteJson(Path.Combine(outDir, ModeOutputs.JsonFileName), analysis, requirements.Any ? verdict : null, source);
        ModeOutputs.WriteCsv(Path.Combine(outDir, ModeOutputs.CsvFileName), analysis);
        var written = new List<string> { ModeOutputs.JsonFileName, ModeOutputs.CsvFileName };
        if (!parse.GetValue(_noPlots))
        {
            ModePlots.Save(Path.Combine(outDir, ModeOutputs.PngFileName), analysis);
            written.Add(ModeOutputs.PngFileName);
        }

        ModeSummary.Print(Out, analysis, source);
        Out.WriteLine($"  wrote {string.Join(", ", written)} to {outDir}");
        if (!requirements.Any) return ExitCodes.Ok;
        Out.WriteLine(verdict.Line);
        return verdict.Passed ? ExitCodes.Ok : ExitCodes.SomeFailed;
    }

    /// <summary>The line list of a result folder, or of a setup unfolded first (by the service the program was given).</summary>
    private (ModeInput Input, string Source, string DefaultOut) ReadInput(string target, CancellationToken cancellationToken)
    {
        if (Directory.Exists(target))
            return (ModeInputReader.FromResultDirectory(target), Path.Combine(target, ModeInputReader.LinesFileName), target);
        if (target.EndsWith(".toml", StringComparison.OrdinalIgnoreCase))
        {
            if (!File.Exists(target)) throw new InputException("the setup file does not exist", target);
            return (Context.Services.UnfoldForModes(target, cancellationToken), target, DefaultSetupOutput);
        }

        throw new InputException(File.Exists(target)
            ? "expected a result folder (holding lines.csv) or a setup file ending in .toml"
            : "no such folder or file; expected a result folder (holding lines.csv) or a setup file ending in .toml", target);
    }
}
