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
                             [--lines "0 GHz:1, 9.2 GHz:0.8"] [--lengths "100 mm, 93.7 mm" | --fsr "1.5 GHz, 1.6 GHz"]
                             [--geometry planar|confocal] [--finesse 150] [--span-fsr 5] [--samples 12000]
                             [--noise 0.004] [--bits 8] [--seed N] [--single-ramp] [--no-calibration]

        Writes one CSV per cavity (time, ramp, signal, with a settings preamble like a scope export), a
        calibration-laser CSV per cavity, setup.toml and truth.csv into DIR. All data are simulated:
        Airy transmission of the lines, a piezo with quadratic and cubic non-linearity and hysteresis,
        detector offset, Gaussian noise (--noise, a fraction of the peak signal) and --bits quantisation.
        Options given override the scenario's values. Lines are "frequency:intensity" pairs.
        """;

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args,
            ["out", "scenario", "lines", "lengths", "fsr", "geometry", "finesse", "span-fsr", "samples", "noise", "bits", "seed"],
            ["single-ramp", "no-calibration"]);
        a.NoMorePositionals(0);
        var outDir = a.Value("out") ?? throw new UsageException("simulate: --out DIR is required");
        var spec = Scenarios.ByName(a.Value("scenario") ?? "demo");
        if (a.Value("lines") is string lines) spec = spec with { Lines = ParseLines(lines) };
        var geometry = (a.Value("geometry") ?? "planar").ToLowerInvariant() switch
        {
            "planar" => CavityGeometry.Planar,
            "confocal" => CavityGeometry.Confocal,
            var g => throw new UsageException($"simulate: --geometry expects planar or confocal but got '{g}'"),
        };
        var finesse = a.Double("finesse") ?? spec.Cavities[0].Instrument.Finesse;
        if (finesse < 1) throw new UsageException($"simulate: --finesse must be at least 1 but got {finesse}");
        List<Instrument>? instruments = null;
        if (a.Value("lengths") is string lens)
            instruments = SplitList(lens).Select((t, i) => Instrument.FromLength(((char)('A' + i)).ToString(), Parse(t, Dimension.Length, "--lengths"), geometry, finesse)).ToList();
        else if (a.Value("fsr") is string fsrs)
            instruments = SplitList(fsrs).Select((t, i) => new Instrument(((char)('A' + i)).ToString(), Parse(t, Dimension.Frequency, "--fsr"), finesse, geometry)).ToList();
        var template = spec.Cavities[0];
        var cavities = (instruments ?? spec.Cavities.Select(c => c.Instrument with { Finesse = finesse }).ToList())
            .Select((inst, i) => (i < spec.Cavities.Count ? spec.Cavities[i] : template) with { Instrument = inst })
            .Select(c => c with
            {
                SpanFsr = a.Double("span-fsr") ?? c.SpanFsr,
                Samples = a.Int("samples", 64) ?? c.Samples,
            }).ToList();
        spec = spec with
        {
            Cavities = cavities,
            NoiseFraction = a.Double("noise") ?? spec.NoiseFraction,
            Bits = a.Int("bits", 0) ?? spec.Bits,
            Seed = a.Int("seed") ?? spec.Seed,
            Triangle = !a.Flag("single-ramp") && spec.Triangle,
            CalibrationSweeps = !a.Flag("no-calibration") && spec.CalibrationSweeps,
        };
        if (spec.NoiseFraction < 0) throw new UsageException("simulate: --noise must not be negative");
        string setupPath;
        IReadOnlyList<string> files;
        using (var staged = Io.StagedFolder.Create(outDir)) // complete or absent (Io/StagedFolder.cs)
        {
            var output = Scenarios.Write(spec, staged.Path);
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
            var f = Parse(parts[0], Dimension.Frequency, "--lines");
            var i = 1.0;
            if (parts.Length > 1 && (!double.TryParse(parts[1], NumberStyles.Float, CultureInfo.InvariantCulture, out i) || !(i > 0)))
                throw new UsageException($"simulate: --lines: intensity in '{item}' must be a positive number");
            list.Add(new SimulatedLine(f, i));
        }

        if (list.Count == 0) throw new UsageException("simulate: --lines names no line");
        return list;
    }
}
