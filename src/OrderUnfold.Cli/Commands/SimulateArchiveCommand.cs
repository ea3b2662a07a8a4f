using OrderUnfold.Pipeline.Batch;
using OrderUnfold.Simulation;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold simulate-archive --out DIR</c>: the demo archive for batch, merge and track.</summary>
public sealed class SimulateArchiveCommand : ICommand
{
    public string Name => "simulate-archive";
    public string Summary => "write a simulated archive of sweeps (demo for batch, merge and track)";

    public string Usage => """
        orderunfold simulate-archive --out DIR [--items 300] [--seed N] [--no-hop]

        Writes a simulated monitoring archive (SIMULATED DATA, an invented scenario): a laser watched through
        one scanning cavity every 5 s, 2 500 samples per sweep; it drifts slowly and hops to the next mode
        at item 181 (with --items 300), after its side-mode suppression has fallen. A few items are damaged
        on purpose (an empty file, a file cut after its header, binary garbage, a missing file, a sweep with
        the laser off, a row with an unreadable time stamp). Writes DIR/sweeps/*.csv, the calibration-laser
        sweep, setup.toml, calibration.json (made from it), manifest.csv and truth.csv. Then:
          orderunfold batch DIR/manifest.csv --out RESULTS
          orderunfold track RESULTS
        """;

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args, ["out", "items", "seed"], ["no-hop"]);
        a.NoMorePositionals(0);
        var outDir = a.Value("out") ?? throw new UsageException("simulate-archive: --out DIR is required");
        var spec = new ArchiveSpec();
        var items = a.Int("items", 1) ?? spec.Items;
        if (items > 100_000) throw new UsageException($"simulate-archive: --items must be at most 100000 but got {items}");
        spec = spec with
        {
            Items = items,
            Seed = a.Int("seed") ?? spec.Seed,
            HopAt = a.Flag("no-hop") ? -1 : (int)Math.Round(spec.HopAt * (items / (double)spec.Items)),
            Defects = spec.Defects.Where(d => d.Key < items).ToDictionary(),
        };
        string manifest, calibration, truth;
        using (var staged = Io.StagedFolder.Create(outDir)) // complete or absent (Io/StagedFolder.cs)
        {
            var output = DemoArchive.Write(staged.Path, spec);
            (manifest, calibration, truth) = (staged.Final(output.ManifestPath), staged.Final(output.CalibrationPath), staged.Final(output.Simulation.TruthPath));
            staged.Publish(Path.GetFileName(output.ManifestPath));
        }

        stdout.WriteLine($"wrote a simulated archive of {items} item(s) (SIMULATED DATA) to {Path.GetFullPath(outDir)}");
        stdout.WriteLine($"  manifest:    {manifest}");
        stdout.WriteLine($"  calibration: {calibration}");
        stdout.WriteLine($"  truth:       {truth}");
        stdout.WriteLine($"next: {Hint.Command($"batch {Hint.Quote(manifest)} --out batch-out")} && {Hint.Command("track batch-out")}");
        return ExitCodes.Ok;
    }
}
