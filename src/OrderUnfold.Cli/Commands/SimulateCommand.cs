using System.Globalization;
using OrderUnfold.Instruments;
using OrderUnfold.Simulation;
using OrderUnfold.Units;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold simulate</c>: synthetic sweeps and a matching setup.</summary>
public sealed class SimulateCommand : ICommand
{
    public string Name => "simulate";
    public string Summary => "write simulated sweeps and a matching setup for a described source";

    public string Usage => """
        orderunfold simulate --out DIR [--scenario demo|caesium|single]
                             [--lines "0 GHz:1, 9.2 GHz:0.8:5 MHz"] [--lengths "100 mm, 93.7 mm" | --fsr "1.5 GHz, 1.6 GHz"]
                             [--geometry planar|confocal] [--finesse 150] [--span-fsr 5] [--samples 12000]
                             [--noise 0.004] [--bits 8] [--seed N] [--single-ramp] [--no-calibration]
                             [--sample-interval "2 us"] [--families "0.532:1.85, 0.064:0.3"] [--ring-down]
                             [--full-scale 0.9] [--stated-fsr-factor 1.02] [--stated-finesse-factor 3]
                             [--split-channels]

        Writes one CSV per cavity (time, ramp, signal, with a settings preamble like a scope export), a
        calibration-laser CSV per cavity, setup.toml and truth.csv into DIR. All data are simulated:
        Airy transmission of the lines, a piezo with quadratic and cubic non-linearity and hysteresis,
        detector offset, Gaussian noise (--noise, a fraction of the peak signal) and --bits quantisation.
        Options given override the scenario's values. Lines are "frequency:intensity[:width]" triples; a
        width is the line's intrinsic Lorentzian FWHM (convolved with the Airy response).

        What real data contain (see docs/simulate.md):
          --sample-interval T       time between samples (default 2 us); short intervals make fast sweeps
          --families "o:h, ..."     transverse families of every cavity: resonances o FSR (0 <= o < 1) above
                                    TEM00, peak height h relative to TEM00
          --ring-down               integrate the swept-cavity field equation instead of the static Airy
                                    response: fast sweeps ring on the trailing side of each peak
          --full-scale F            the digitiser's range ends at F times the largest signal (default 1.15);
                                    below 1 the highest peaks are clipped
          --stated-fsr-factor K     the setup states K times the simulated FSR (a datasheet error)
          --stated-finesse-factor K the setup states K times the simulated finesse (a poor guess)
          --split-channels          signal and ramp in two files each (header block, then time and value),
                                    read back through ramp_file
        """;

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args,
            ["out", "scenario", "lines", "lengths", "fsr", "geometry", "finesse", "span-fsr", "samples", "noise", "bits", "seed",
             "sample-interval", "families", "full-scale", "stated-fsr-factor", "stated-finesse-factor"],
            ["single-ramp", "no-calibration", "ring-down", "split-channels"]);
        a.NoMorePositionals(0);
        var outDir = a.Value("out") ?? throw new UsageException("simulate: --out DIR is required");
        var spec = Scenarios.ByName(a.Value("scenario") ?? "demo");
        if (a.Value("lines") is string lines) spec = spec with { Lines = ParseLines(lines) };
        var geometryName = a.Value("geometry") ?? "planar";
        if (!CavityGeometryNames.TryParse(geometryName, out var geometry))
            throw new UsageException($"simulate: --geometry expects {CavityGeometryNames.Choices} but got '{geometryName.ToLowerInvariant()}'");
        var finesse = a.Double("finesse") ?? spec.Cavities[0].Instrument.Finesse;
        if (finesse < 1) throw new UsageException($"simulate: --finesse must be at least 1 but got {finesse}");
        List<Instrument>? instruments = null;
        if (a.Value("lengths") is string lens)
            instruments = SplitList(lens).Select((t, i) => Instrument.FromLength(((char)('A' + i)).ToString(), Parse(t, Dimension.Length, "--lengths"), geometry, finesse)).ToList();
        else if (a.Value("fsr") is string fsrs)
            instruments = SplitList(fsrs).Select((t, i) => new Instrument(((char)('A' + i)).ToString(), Parse(t, Dimension.Frequency, "--fsr"), finesse, geometry)).ToList();
        var families = a.Value("families") is string fam ? ParseFamilies(fam) : null;
        var template = spec.Cavities[0];
        var cavities = (instruments ?? spec.Cavities.Select(c => c.Instrument with { Finesse = finesse }).ToList())
            .Select((inst, i) => (i < spec.Cavities.Count ? spec.Cavities[i] : template) with { Instrument = inst })
            .Select(c => c with
            {
                SpanFsr = a.Double("span-fsr") ?? c.SpanFsr,
                Samples = a.Int("samples", 64) ?? c.Samples,
                Families = families ?? c.Families,
            }).ToList();
        spec = spec with
        {
            Cavities = cavities,
            NoiseFraction = a.Double("noise") ?? spec.NoiseFraction,
            Bits = a.Int("bits", 0) ?? spec.Bits,
            Seed = a.Int("seed") ?? spec.Seed,
            Triangle = !a.Flag("single-ramp") && spec.Triangle,
            CalibrationSweeps = !a.Flag("no-calibration") && spec.CalibrationSweeps,
            SampleIntervalS = a.Quantity("sample-interval", Dimension.Time) ?? spec.SampleIntervalS,
            RingDown = a.Flag("ring-down") || spec.RingDown,
            FullScale = a.Double("full-scale") ?? spec.FullScale,
            StatedFsrFactor = a.Double("stated-fsr-factor") ?? spec.StatedFsrFactor,
            StatedFinesseFactor = a.Double("stated-finesse-factor") ?? spec.StatedFinesseFactor,
            SplitChannels = a.Flag("split-channels") || spec.SplitChannels,
        };
        if (spec.NoiseFraction < 0) throw new UsageException("simulate: --noise must not be negative");
        if (!(spec.SampleIntervalS > 0)) throw new UsageException("simulate: --sample-interval must be a positive time");
        if (spec.FullScale is double fs && !(fs > 0)) throw new UsageException($"simulate: --full-scale must be positive but got {fs}");
        if (!(spec.StatedFsrFactor > 0)) throw new UsageException($"simulate: --stated-fsr-factor must be positive but got {spec.StatedFsrFactor}");
        if (!(spec.StatedFinesseFactor > 0)) throw new UsageException($"simulate: --stated-finesse-factor must be positive but got {spec.StatedFinesseFactor}");
        if (spec.RingDown && spec.Lines.Any(l => l.WidthHz > 0))
            throw new UsageException("simulate: --ring-down takes lines without an intrinsic width; drop the widths from --lines or drop --ring-down");
        string setupPath;
        IReadOnlyList<string> files;
        using (var staged = Io.StagedFolder.Create(outDir)) // complete or absent (Io/StagedFolder.cs)
        {
            var output = SimulationFiles.WriteScenario(spec, staged.Path);
            setupPath = staged.Final(output.SetupPath);
            files = output.Files;
            staged.Publish(Path.GetFileName(output.SetupPath));
        }

        stdout.WriteLine($"wrote {files.Count} files (simulated data) to {Path.GetFullPath(outDir)}:");
        foreach (var f in files) stdout.WriteLine($"  {Path.GetFileName(f)}");
        stdout.WriteLine($"next: {Hint.Command("unfold " + Hint.Quote(setupPath))}");
        return ExitCodes.Ok;
    }

    private static IEnumerable<string> SplitList(string text) => text.Split(',', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries);

    private static double Parse(string text, Dimension d, string what)
    {
        if (!Quantity.TryParse(text, d, out var v, out var error)) throw new UsageException($"simulate: {what}: {error}");
        return v;
    }

    private static IReadOnlyList<SimulatedLine> ParseLines(string text)
    {
        var list = new List<SimulatedLine>();
        foreach (var item in SplitList(text))
        {
            var parts = item.Split(':', StringSplitOptions.TrimEntries);
            if (parts.Length > 3) throw new UsageException($"simulate: --lines: expected frequency:intensity[:width] but got '{item}'");
            var f = Parse(parts[0], Dimension.Frequency, "--lines");
            var i = 1.0;
            if (parts.Length > 1 && (!double.TryParse(parts[1], NumberStyles.Float, CultureInfo.InvariantCulture, out i) || !(i > 0)))
                throw new UsageException($"simulate: --lines: intensity in '{item}' must be a positive number");
            var width = parts.Length > 2 ? Parse(parts[2], Dimension.Frequency, "--lines") : 0;
            if (width < 0) throw new UsageException($"simulate: --lines: width in '{item}' must not be negative");
            list.Add(new SimulatedLine(f, i, width));
        }

        if (list.Count == 0) throw new UsageException("simulate: --lines names no line");
        return list;
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
                throw new UsageException($"simulate: --families: expected offset:height (e.g. 0.532:1.85) but got '{item}'");
            if (!(offset >= 0 && offset < 1))
                throw new UsageException($"simulate: --families: the offset in '{item}' is a fraction of an FSR from 0 up to (not including) 1");
            if (!(height > 0 && double.IsFinite(height)))
                throw new UsageException($"simulate: --families: the height in '{item}' must be a positive number");
            list.Add(new TransverseFamily(offset, height));
        }

        if (list.Count == 0) throw new UsageException("simulate: --families names no family");
        return list;
    }
}
