using System.CommandLine;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Pipeline;
using OrderUnfold.Plotting;
using OrderUnfold.Simulation;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold demo</c>: the whole job on the built-in simulated demo data.</summary>
internal sealed class DemoCommand : VerbCommand
{
    private readonly Option<string?> _out = SharedOptions.Out("./demo-output");
    private readonly Option<string?> _data = ValueOptions.Text("--data", "DIR", "the demo data (default: data/demo next to the program or above the working folder)");
    private readonly Option<bool> _noPlots = SharedOptions.NoPlots();
    private readonly Option<bool> _quiet = SharedOptions.Quiet("; a one-line summary instead of the table of lines");

    public DemoCommand(CliContext cli) : base("demo", "run the whole job on the built-in demo (simulated data) and compare with the truth", cli)
    {
        AddOptions([_out, _data, _noPlots, _quiet]);
    }

    public override string Details => """
        Unfolds the demo measurement in data/demo (simulated: a dual-wavelength fibre laser seen by two
        cavities of 100.0 mm and 93.7 mm; see data/demo/README.md), writes the outputs to DIR and prints the
        lines found beside the simulated truth.
        """;

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        var quiet = parse.GetValue(_quiet);
        var dataDir = parse.GetValue(_data) ?? LocateDemo() ??
                      throw new InputException("the demo data folder (data/demo) was not found next to the program or above the working directory; pass --data DIR");
        var setup = Path.Combine(dataDir, "setup.toml");
        var outDir = Path.GetFullPath(parse.GetValue(_out) ?? "demo-output");
        Out.WriteLine("OrderUnfold demo: SIMULATED data (a dual-wavelength fibre laser under test, an invented scenario)");
        Out.WriteLine($"data: {dataDir}");
        var run = UnfoldPipeline.Run(setup, new StderrProgress(Error, quiet), cancellationToken: cancellationToken);
        using (var staged = Io.StagedFolder.Create(outDir)) // complete or absent (Io/StagedFolder.cs)
        {
            UnfoldOutputs.Write(run, staged.Path, figures: parse.GetValue(_noPlots) ? null : new FigureWriter(), toolVersion: Cli.Version);
            staged.Publish(OutputNames.Report, cancellationToken);
        }

        if (quiet) Summary.UnfoldBrief(run, Out);
        else Summary.Unfold(run, Out);
        var truthPath = Path.Combine(dataDir, "truth.csv");
        if (File.Exists(truthPath)) CompareWithTruth(run, SimulationFiles.ReadTruth(truthPath));
        Out.WriteLine($"outputs: {outDir}");
        return ExitCodes.Ok;
    }

    /// <summary>Prints each simulated line beside the nearest line found (within three linewidths), and what is missing or extra.</summary>
    private void CompareWithTruth(UnfoldRun run, IReadOnlyList<SimulatedLine> truth)
    {
        Out.WriteLine();
        Out.WriteLine("found versus simulated truth (relative to the strongest line):");
        Out.WriteLine("  true frequency     found frequency    difference    true int.  found int.");
        var missing = 0;
        foreach (var t in truth)
        {
            var best = run.Result.Lines.MinBy(l => Math.Abs(l.FrequencyHz - t.FrequencyHz));
            if (best is null || Math.Abs(best.FrequencyHz - t.FrequencyHz) > 3 * run.Instruments.Min(i => i.LinewidthHz))
            {
                missing++;
                Out.WriteLine($"  {Quantity.FormatFrequency(t.FrequencyHz, 7),-18} {"not found",-18}");
                continue;
            }

            Out.WriteLine($"  {Quantity.FormatFrequency(t.FrequencyHz, 7),-18} {Quantity.FormatFrequency(best.FrequencyHz, 7),-18} {Quantity.FormatFrequency(best.FrequencyHz - t.FrequencyHz, 3),-13} {t.Intensity,9:F3}  {best.Intensity,9:F3}");
        }

        var extra = run.Result.Lines.Count - (truth.Count - missing);
        Out.WriteLine(missing == 0 && extra <= 0
            ? $"all {truth.Count} simulated lines found, no extra line"
            : $"{truth.Count - missing} of {truth.Count} simulated lines found; {Math.Max(0, extra)} extra line(s)");
    }

    /// <summary>The demo data: next to the program (copied at build), else data/demo above the working directory.</summary>
    public static string? LocateDemo()
    {
        var beside = Path.Combine(AppContext.BaseDirectory, "demo");
        if (File.Exists(Path.Combine(beside, "setup.toml"))) return beside;
        for (var dir = new DirectoryInfo(Directory.GetCurrentDirectory()); dir is not null; dir = dir.Parent)
        {
            var candidate = Path.Combine(dir.FullName, "data", "demo");
            if (File.Exists(Path.Combine(candidate, "setup.toml"))) return candidate;
        }

        return null;
    }
}
