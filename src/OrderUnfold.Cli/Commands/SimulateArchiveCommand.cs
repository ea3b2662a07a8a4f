using OrderUnfold.Io;
using System.CommandLine;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Pipeline.Batch;
using OrderUnfold.Simulation;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold simulate-archive --out DIR</c>: the demo archive for batch, merge and track.</summary>
internal sealed class SimulateArchiveCommand : VerbCommand
{
    private static readonly ArchiveSpec Defaults = new();

    private readonly Option<string?> _out = SharedOptions.Out(null);
    private readonly Option<int?> _items = ValueOptions.WholeNumber("--items", "N", $"sweeps in the archive (default {Defaults.Items})", min: 1, max: 100_000);
    private readonly Option<int?> _seed = SharedOptions.Seed(Defaults.Seed.ToString(System.Globalization.CultureInfo.InvariantCulture));
    private readonly Option<bool> _noHop = ValueOptions.Flag("--no-hop", "the laser stays on its mode (no mode hop)");

    public SimulateArchiveCommand(CliContext cli) : base("simulate-archive", "write a simulated archive of sweeps (demo for batch, merge and track)", cli)
    {
        AddOptions([_out, _items, _seed, _noHop]);
    }

    public override string Details => $"""
        Writes a simulated monitoring archive (SIMULATED DATA, an invented scenario): a laser watched through
        one scanning cavity every 5 s, 2 500 samples per sweep; it drifts slowly and hops to the next mode
        at item 181 (with --items 300), after its side-mode suppression has fallen. A few items are damaged
        on purpose (an empty file, a file cut after its header, binary garbage, a missing file, a sweep with
        the laser off, a row with an unreadable time stamp). Writes DIR/sweeps/*.csv, the calibration-laser
        sweep, setup.toml, calibration.json (made from it), manifest.csv and truth.csv. Then:
          {Hint.Command("batch DIR/manifest.csv --out RESULTS")}
          {Hint.Command("track RESULTS")}
        """;

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        var outDir = parse.GetValue(_out)!;
        var items = parse.GetValue(_items) ?? Defaults.Items;
        var spec = Defaults with
        {
            Items = items,
            Seed = parse.GetValue(_seed) ?? Defaults.Seed,
            Laser = Defaults.Laser with { HopAt = parse.GetValue(_noHop) ? -1 : (int)Math.Round(Defaults.Laser.HopAt * (items / (double)Defaults.Items)) },
            Defects = Defaults.Defects.Where(d => d.Key < items).ToDictionary(),
        };
        string manifest, calibration, truth;
        using (var staged = Io.StagedFolder.Create(outDir)) // complete or absent (Io/StagedFolder.cs)
        {
            var output = DemoArchive.Write(staged.Path, spec, cancellationToken);
            (manifest, calibration, truth) = (staged.Final(output.ManifestPath), staged.Final(output.CalibrationPath), staged.Final(output.Simulation.TruthPath));
            staged.Publish(Path.GetFileName(output.ManifestPath), cancellationToken);
        }

        Out.WriteLine($"wrote a simulated archive of {items} item(s) (SIMULATED DATA) to {Path.GetFullPath(outDir)}");
        Out.WriteLine($"  manifest:    {manifest}");
        Out.WriteLine($"  calibration: {calibration}");
        Out.WriteLine($"  truth:       {truth}");
        Out.WriteLine($"next: {Hint.Command($"batch {Hint.Quote(manifest)} --out batch-out")} && {Hint.Command("track batch-out")}");
        return ExitCodes.Ok;
    }
}
