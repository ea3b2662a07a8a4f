using System.Globalization;
using OrderUnfold.Analysis.Modes;
using OrderUnfold.Plotting;
using OrderUnfold.Units;

namespace OrderUnfold.Cli.Commands;

/// <summary>
/// <c>orderunfold modes SETUP|RESULT_DIR</c>: longitudinal-mode analysis of a laser (spacing, count, SMSR,
/// envelope) with an optional pass/fail verdict for a test station.
/// </summary>
public sealed class ModesCommand : ICommand
{
    /// <summary>
    /// Runs the unfold for a setup file and returns the mode input. Set by the part of the program that owns
    /// the unfold pipeline; while null, <c>modes SETUP.toml</c> exits with code 2 and says what to do instead.
    /// </summary>
    public static Func<string, ModeInput>? UnfoldSetup { get; set; }

    /// <summary>Output folder used for a setup file when --out is not given.</summary>
    public const string DefaultSetupOutput = "modes-out";

    public string Name => "modes";

    public string Summary => "laser modes: spacing, count, side-mode suppression, envelope; PASS/FAIL";

    public string Usage => """
        orderunfold modes SETUP.toml|RESULT_DIR [options]

        Longitudinal modes of a laser from an unfolded line list: fits a comb ν0 + k·Δ (robust to missing
        modes, spurious lines and a second mode family), gives the mode spacing Δ and the laser's optical
        length c/(2Δ), the number of lines within a level of the strongest, the side-mode suppression ratio
        (SMSR) and the gain envelope. RESULT_DIR holds lines.csv (and report.json) from 'orderunfold unfold';
        with SETUP.toml the unfold runs first.

        Writes modes.json, modes.csv and modes.png to the output folder.

        Options:
          --out DIR                 output folder (default: RESULT_DIR, or ./modes-out for a setup)
          --within LEVEL            count lines within this level of the strongest (default 20dB)
          --group-index N           group index of the laser medium: also report the physical length
          --require-smsr LEVEL      PASS only if the SMSR is at least this (e.g. 30dB)
          --require-max-modes N     PASS only if at most N lines lie within the --within level
          --min-modes-for-comb N    fewest lines that count as a comb (default 2)
          --comb-tolerance X        comb membership tolerance as a fraction of the spacing (default 0.02)
          --spacing-min FREQ        one cavity only: the laser's spacing is known to be at least this
          --spacing-max FREQ        one cavity only: the laser's spacing is known to be at most this
          --no-plot                 do not write modes.png

        Exit codes: 0 PASS (or no requirement stated), 1 FAIL of a stated requirement, 2 bad input.
        """;

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args,
            ["out", "within", "group-index", "require-smsr", "require-max-modes", "min-modes-for-comb", "comb-tolerance", "spacing-min", "spacing-max"],
            ["no-plot"]);
        var target = a.Positional(0, "SETUP.toml or RESULT_DIR");
        a.NoMorePositionals(1);

        var options = new ModeAnalysisOptions
        {
            WithinDb = Positive(a, "within", a.Quantity("within", Dimension.Decibel)) ?? 20,
            GroupIndex = Positive(a, "group-index", a.Double("group-index")),
            MinModesForComb = a.Int("min-modes-for-comb", 2) ?? 2,
            CombToleranceFraction = a.Double("comb-tolerance") is { } ct
                ? (ct > 0 && ct <= 0.25 ? ct : throw new UsageException($"modes: --comb-tolerance expects a fraction in (0, 0.25] but got {ct.ToString(CultureInfo.InvariantCulture)}"))
                : 0.02,
            SpacingMinHz = Positive(a, "spacing-min", a.Quantity("spacing-min", Dimension.Frequency)),
            SpacingMaxHz = Positive(a, "spacing-max", a.Quantity("spacing-max", Dimension.Frequency)),
        };
        if (options.SpacingMinHz is { } lo && options.SpacingMaxHz is { } hi && lo >= hi)
            throw new UsageException($"modes: --spacing-min ({Quantity.FormatFrequency(lo)}) must be below --spacing-max ({Quantity.FormatFrequency(hi)})");
        var requirements = new ModeRequirements(a.Quantity("require-smsr", Dimension.Decibel), a.Int("require-max-modes", 1));

        ModeInput input;
        string outDir;
        string source;
        if (Directory.Exists(target))
        {
            input = ModeInputReader.FromResultDirectory(target);
            outDir = a.Value("out") ?? target;
            source = Path.Combine(target, ModeInputReader.LinesFileName);
        }
        else if (target.EndsWith(".toml", StringComparison.OrdinalIgnoreCase))
        {
            if (!File.Exists(target)) throw new InputException("the setup file does not exist", target);
            if (UnfoldSetup is null)
            {
                stderr.WriteLine("orderunfold modes: running the unfold from a setup is not available in this build; " +
                                 $"run '{Hint.Command($"unfold {Hint.Quote(target)} --out DIR")}' then '{Hint.Command("modes DIR")}'");
                return ExitCodes.BadInput;
            }

            input = UnfoldSetup(target);
            outDir = a.Value("out") ?? DefaultSetupOutput;
            source = target;
        }
        else
        {
            throw new InputException(File.Exists(target)
                ? "expected a result folder (holding lines.csv) or a setup file ending in .toml"
                : "no such folder or file; expected a result folder (holding lines.csv) or a setup file ending in .toml", target);
        }

        var analysis = LaserModes.Analyse(input, options);
        var verdict = ModeCheck.Check(analysis, requirements);

        Directory.CreateDirectory(outDir);
        ModeOutputs.WriteJson(Path.Combine(outDir, ModeOutputs.JsonFileName), analysis, requirements.Any ? verdict : null, source);
        ModeOutputs.WriteCsv(Path.Combine(outDir, ModeOutputs.CsvFileName), analysis);
        var written = new List<string> { ModeOutputs.JsonFileName, ModeOutputs.CsvFileName };
        if (!a.Flag("no-plot"))
        {
            ModePlots.Save(Path.Combine(outDir, ModeOutputs.PngFileName), analysis);
            written.Add(ModeOutputs.PngFileName);
        }

        PrintSummary(stdout, analysis, source);
        stdout.WriteLine($"  wrote {string.Join(", ", written)} to {outDir}");
        if (!requirements.Any) return ExitCodes.Ok;
        stdout.WriteLine(verdict.Line);
        return verdict.Passed ? ExitCodes.Ok : ExitCodes.SomeFailed;
    }

    /// <summary>A residual in Hz: "&lt; 1 Hz" below one hertz (a noise-free comb), else three digits.</summary>
    private static string Small(double hz) => hz < 1 ? "< 1 Hz" : Quantity.FormatFrequency(hz, 3);

    private static double? Positive(Args a, string name, double? value)
    {
        if (value is { } v && !(v > 0))
            throw new UsageException($"modes: --{name} must be positive but got '{a.Value(name)}'");
        return value;
    }

    private static void PrintSummary(TextWriter o, ModeAnalysis a, string source)
    {
        var ci = CultureInfo.InvariantCulture;
        o.WriteLine($"modes: {a.Lines.Count} line{(a.Lines.Count == 1 ? "" : "s")} from {source} " +
                    $"({(a.OrdersResolved ? "orders resolved" : "one cavity: positions folded")})");
        if (a.Comb is { } c)
        {
            var missing = c.MissingK.Count == 0 ? "none missing" : $"missing k = {string.Join(", ", c.MissingK.Select(k => k.ToString("+0;-0;0", ci)))}";
            o.WriteLine($"  comb: {c.MemberCount} modes, k = {c.FirstK.ToString("+0;-0;0", ci)} … {c.LastK.ToString("+0;-0;0", ci)}, {missing}; " +
                        $"irregularity rms {Small(c.RmsResidualHz)}, max {Small(c.MaxAbsResidualHz)}");
        }
        else
        {
            o.WriteLine("  comb: none");
        }

        if (a.Spacing is { } s)
        {
            o.WriteLine($"  spacing {WithSigma(s.SpacingHz, s.SigmaHz, Quantity.FormatFrequency)}; optical length c/(2Δ) " +
                        WithSigma(s.OpticalLengthM, s.OpticalLengthSigmaM, Quantity.FormatLength) +
                        (s.PhysicalLengthM is { } l ? $"; physical length {WithSigma(l, s.PhysicalLengthSigmaM, Quantity.FormatLength)} at group index {s.GroupIndex!.Value.ToString("0.###", ci)}" : ""));
        }

        if (a.Folded is { } f)
        {
            o.WriteLine($"  folded: spacing ≡ ±{Quantity.FormatFrequency(f.FoldedStepHz)} modulo FSR {Quantity.FormatFrequency(f.FsrHz)}");
            o.WriteLine($"  {f.ChoiceReason}");
            if (f.Chosen is null)
            {
                var shown = f.Candidates.Where(x => x.Divisor == 1).Take(8).Select(x => Quantity.FormatFrequency(x.SpacingHz));
                o.WriteLine($"  candidate spacings: {string.Join(", ", shown)}{(f.Candidates.Count(x => x.Divisor == 1) > 8 ? ", …" : "")} (all in modes.json)");
                o.WriteLine($"  {f.SecondCavity}");
            }
        }

        if (a.SecondFamily is { } sf)
            o.WriteLine($"  second family: {sf.MemberCount} lines offset {sf.OffsetFraction.ToString("0.000", ci)} of the spacing, strongest {sf.StrongestRelativeDb.ToString("0.0", ci)} dB");

        o.WriteLine($"  lines within {a.Count.WithinDb.ToString("0.#", ci)} dB of the strongest: {a.Count.Total}" +
                    (a.Count.Total != a.Count.MainComb ? $" ({a.Count.MainComb} on the comb)" : ""));
        var smsr = a.Smsr.Kind switch
        {
            SmsrKind.Measured => $"{DbWithSigma(a.Smsr.ValueDb!.Value, a.Smsr.SigmaDb)} dB",
            SmsrKind.LowerBound => $"≥ {a.Smsr.ValueDb!.Value.ToString("0.0", ci)} dB (no side mode above the detection limit)",
            _ => "cannot be bounded (no side mode seen, no detection limit)",
        };
        o.WriteLine($"  SMSR {smsr}");
        var e = a.Envelope;
        if (e.Fitted)
        {
            var centre = e.CentreHz is { } ch
                ? $"centre {WithSigma(ch, e.CentreSigmaHz, Quantity.FormatFrequency)} from the anchor"
                : $"centre at k = {e.CentreK!.Value.ToString("0.00", ci)}";
            var width = e.FwhmHz is { } w
                ? $"FWHM {WithSigma(w, e.FwhmSigmaHz, Quantity.FormatFrequency)}"
                : $"FWHM {e.FwhmModes!.Value.ToString("0.0", ci)} modes";
            o.WriteLine($"  envelope: {centre}, {width}");
        }
        else
        {
            o.WriteLine($"  envelope: not fitted ({e.Message})");
        }

        foreach (var n in a.Notes) o.WriteLine($"  note: {n}");
    }

    /// <summary>"31.2 ± 0.4": rounded to the second significant digit of the sigma (one decimal without one).</summary>
    private static string DbWithSigma(double value, double? sigma)
    {
        var ci = CultureInfo.InvariantCulture;
        if (sigma is not { } s || !(s > 0) || !double.IsFinite(s)) return value.ToString("0.0", ci);
        var decimals = (int)Math.Clamp(1 - Math.Floor(Math.Log10(s)), 0, 6);
        return $"{value.ToString("F" + decimals, ci)} ± {s.ToString("F" + decimals, ci)}";
    }

    /// <summary>
    /// A value with its sigma in one unit chosen from the value ("52.04705 ± 0.00068 GHz"), rounded to the second
    /// significant digit of the sigma; without a sigma, seven significant digits.
    /// </summary>
    private static string WithSigma(double value, double? sigma, Func<double, int, string> format)
    {
        if (sigma is not { } s || !(s > 0) || !double.IsFinite(s)) return format(value, 7);
        var text = format(value, 4);
        var unit = text[(text.LastIndexOf(' ') + 1)..];
        var factor = UnitFactor(unit);
        var decimals = (int)Math.Clamp(1 - Math.Floor(Math.Log10(s / factor)), 0, 12);
        var ci = CultureInfo.InvariantCulture;
        return $"{(value / factor).ToString("F" + decimals, ci)} ± {(s / factor).ToString("F" + decimals, ci)} {unit}";
    }

    private static double UnitFactor(string unit) => unit switch
    {
        "THz" => 1e12,
        "GHz" => 1e9,
        "MHz" => 1e6,
        "kHz" => 1e3,
        "mm" => 1e-3,
        "um" => 1e-6,
        "nm" => 1e-9,
        _ => 1,
    };
}
