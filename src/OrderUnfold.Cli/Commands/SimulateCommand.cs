using OrderUnfold.Io;
using System.CommandLine;
using System.Globalization;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Simulation;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold simulate</c>: synthetic sweeps and a matching setup.</summary>
internal sealed class SimulateCommand : VerbCommand
{
    private readonly Option<string?> _out = SharedOptions.Out(null);
    private readonly Option<string?> _scenario = ValueOptions.Word("--scenario", "the source and cavities to start from (default demo)", Scenarios.Names);
    private readonly Option<IReadOnlyList<SimulatedLine>?> _lines = SharedOptions.Lines("the source's lines");
    private readonly Option<string?> _lengths = ValueOptions.Text("--lengths", "\"L1, L2, ...\"", "cavity lengths, e.g. \"100 mm, 93.7 mm\" (instead of the scenario's)");
    private readonly Option<string?> _fsr = ValueOptions.Text("--fsr", "\"F1, F2, ...\"", "cavity FSRs, e.g. \"1.5 GHz, 1.6 GHz\" (instead of --lengths)");
    private readonly Option<CavityGeometry?> _geometry = SharedOptions.Geometry("--geometry", "geometry of the cavities given by --lengths or --fsr (default planar)");
    private readonly Option<double?> _finesse = SharedOptions.Finesse("--finesse", "finesse of every cavity (default: the scenario's)");
    private readonly Option<double?> _spanFsr = ValueOptions.Number("--span-fsr", "N", "FSRs each ramp covers", positive: true);
    private readonly Option<int?> _samples = ValueOptions.WholeNumber("--samples", "N", "samples per record", min: 64);
    private readonly Option<double?> _noise = SharedOptions.Noise("0.004");
    private readonly Option<int?> _bits = ValueOptions.WholeNumber("--bits", "N", "digitiser resolution in bits (default 8; 0: no quantisation)", min: 0);
    private readonly Option<int?> _seed = SharedOptions.Seed("1");
    private readonly Option<bool> _singleRamp = ValueOptions.Flag("--single-ramp", "one ramp direction per record instead of a triangle");
    private readonly Option<bool> _noCalibration = ValueOptions.Flag("--no-calibration", "write no calibration-laser sweeps");
    private readonly Option<double?> _sampleInterval = ValueOptions.Quantity("--sample-interval", Dimension.Time, "T",
        "time between samples (default 2 us); short intervals make fast sweeps", positive: true);
    private readonly Option<string?> _families = ValueOptions.Text("--families", "\"o:h, ...\"",
        "transverse families of every cavity: resonances o FSR (0 <= o < 1) above TEM00, peak height h relative to TEM00");
    private readonly Option<bool> _ringDown = ValueOptions.Flag("--ring-down",
        "integrate the swept-cavity field equation instead of the static Airy response: fast sweeps ring on the trailing side of each peak");
    private readonly Option<double?> _fullScale = ValueOptions.Number("--full-scale", "F",
        "the digitiser's range ends at F times the largest signal (default 1.15); below 1 the highest peaks are clipped", positive: true);
    private readonly Option<double?> _statedFsrFactor = ValueOptions.Number("--stated-fsr-factor", "K", "the setup states K times the simulated FSR (a datasheet error)", positive: true);
    private readonly Option<double?> _statedFinesseFactor = ValueOptions.Number("--stated-finesse-factor", "K", "the setup states K times the simulated finesse (a poor guess)", positive: true);
    private readonly Option<bool> _splitChannels = ValueOptions.Flag("--split-channels",
        "signal and ramp in two files each (header block, then time and value), read back through ramp_file");

    public SimulateCommand(CliContext cli) : base("simulate", "write simulated sweeps and a matching setup for a described source", cli)
    {
        AddOptions(
        [
            _out, _scenario, _lines, _lengths, _fsr, _geometry, _finesse, _spanFsr, _samples, _noise, _bits, _seed,
            _singleRamp, _noCalibration, _sampleInterval, _families, _ringDown, _fullScale, _statedFsrFactor,
            _statedFinesseFactor, _splitChannels,
        ]);
    }

    public override string Details => """
        Writes one CSV per cavity (time, ramp, signal, with a settings preamble like a scope export), a
        calibration-laser CSV per cavity, setup.toml and truth.csv into DIR. All data are simulated:
        Airy transmission of the lines, a piezo with quadratic and cubic non-linearity and hysteresis,
        detector offset, Gaussian noise (--noise) and --bits quantisation. Options given override the
        scenario's values. What real data contain (transverse families, ring-down, clipping, datasheet
        errors, one channel per file): docs/simulate.md.
        """;

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        var spec = Spec(parse);
        string setupPath;
        IReadOnlyList<string> files;
        using (var staged = Io.StagedFolder.Create(parse.GetValue(_out)!)) // complete or absent (Io/StagedFolder.cs)
        {
            var output = SimulationFiles.WriteScenario(spec, staged.Path);
            setupPath = staged.Final(output.SetupPath);
            files = output.Files;
            staged.Publish(Path.GetFileName(output.SetupPath), cancellationToken);
        }

        Out.WriteLine($"wrote {files.Count} files (simulated data) to {Path.GetFullPath(parse.GetValue(_out)!)}:");
        foreach (var f in files) Out.WriteLine($"  {Path.GetFileName(f)}");
        Out.WriteLine($"next: {Hint.Command("unfold " + Hint.Quote(setupPath))}");
        return ExitCodes.Ok;
    }

    /// <summary>The scenario with every option given applied to it.</summary>
    private SimulationSpec Spec(ParseResult parse)
    {
        var spec = Scenarios.ByName(parse.GetValue(_scenario) ?? "demo");
        if (parse.GetValue(_lines) is { } lines) spec = spec with { Lines = lines };
        var finesse = parse.GetValue(_finesse) ?? spec.Cavities[0].Instrument.Finesse;
        var families = parse.GetValue(_families) is string text ? ParseFamilies(text) : null;
        var template = spec.Cavities[0];
        var cavities = (Instruments(parse, finesse) ?? spec.Cavities.Select(c => c.Instrument with { Finesse = finesse }).ToList())
            .Select((inst, i) => (i < spec.Cavities.Count ? spec.Cavities[i] : template) with { Instrument = inst })
            .Select(c => c with
            {
                SpanFsr = parse.GetValue(_spanFsr) ?? c.SpanFsr,
                Samples = parse.GetValue(_samples) ?? c.Samples,
                Families = families ?? c.Families,
            }).ToList();
        spec = spec with
        {
            Cavities = cavities,
            NoiseFraction = parse.GetValue(_noise) ?? spec.NoiseFraction,
            Bits = parse.GetValue(_bits) ?? spec.Bits,
            Seed = parse.GetValue(_seed) ?? spec.Seed,
            Triangle = !parse.GetValue(_singleRamp) && spec.Triangle,
            CalibrationSweeps = !parse.GetValue(_noCalibration) && spec.CalibrationSweeps,
            SampleIntervalS = parse.GetValue(_sampleInterval) ?? spec.SampleIntervalS,
            RingDown = parse.GetValue(_ringDown) || spec.RingDown,
            FullScale = parse.GetValue(_fullScale) ?? spec.FullScale,
            StatedFsrFactor = parse.GetValue(_statedFsrFactor) ?? spec.StatedFsrFactor,
            StatedFinesseFactor = parse.GetValue(_statedFinesseFactor) ?? spec.StatedFinesseFactor,
            SplitChannels = parse.GetValue(_splitChannels) || spec.SplitChannels,
        };
        if (spec.RingDown && spec.Lines.Any(l => l.WidthHz > 0))
            throw new UsageException("--ring-down takes lines without an intrinsic width; drop the widths from --lines or drop --ring-down");
        return spec;
    }

    /// <summary>The cavities given by --lengths or --fsr (named A, B, …), or null for the scenario's.</summary>
    private List<Instrument>? Instruments(ParseResult parse, double finesse)
    {
        var geometry = parse.GetValue(_geometry) ?? CavityGeometry.Planar;
        if (parse.GetValue(_lengths) is not null && parse.GetValue(_fsr) is not null)
            throw new UsageException("give the cavities by --lengths or by --fsr, not both");
        if (parse.GetValue(_lengths) is string lengthList)
            return SplitList(lengthList).Select((t, i) => Instrument.FromLength(Name(i), Parse(t, Dimension.Length, "--lengths"), geometry, finesse)).ToList();
        if (parse.GetValue(_fsr) is string fsrList)
            return SplitList(fsrList).Select((t, i) => new Instrument(Name(i), Parse(t, Dimension.Frequency, "--fsr"), finesse, geometry)).ToList();
        return null;

        static string Name(int index) => ((char)('A' + index)).ToString();
    }

    private static IEnumerable<string> SplitList(string text) => text.Split(',', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries);

    private static double Parse(string text, Dimension dimension, string option)
    {
        if (!Quantity.TryParse(text, dimension, out var value, out var error)) throw new UsageException($"{option}: {error}");
        if (!(value > 0)) throw new UsageException($"{option}: '{InputException.Clip(text)}' must be positive");
        return value;
    }

    /// <summary>"offset:height, ..." with 0 ≤ offset &lt; 1 (FSR above TEM00) and height &gt; 0 (relative to TEM00).</summary>
    private static IReadOnlyList<TransverseFamily> ParseFamilies(string text)
    {
        var list = new List<TransverseFamily>();
        foreach (var item in SplitList(text))
        {
            var parts = item.Split(':', StringSplitOptions.TrimEntries);
            if (parts.Length != 2 ||
                !double.TryParse(parts[0], NumberStyles.Float, CultureInfo.InvariantCulture, out var offset) ||
                !double.TryParse(parts[1], NumberStyles.Float, CultureInfo.InvariantCulture, out var height))
                throw new UsageException($"--families: expected offset:height (e.g. 0.532:1.85) but got '{InputException.Clip(item)}'");
            if (!(offset >= 0 && offset < 1))
                throw new UsageException($"--families: the offset in '{item}' is a fraction of an FSR from 0 up to (not including) 1");
            if (!(height > 0 && double.IsFinite(height)))
                throw new UsageException($"--families: the height in '{item}' must be a positive number");
            list.Add(new TransverseFamily(offset, height));
        }

        if (list.Count == 0) throw new UsageException("--families names no family");
        return list;
    }
}
