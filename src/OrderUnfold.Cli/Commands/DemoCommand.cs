using OrderUnfold.Plotting;
using OrderUnfold.Pipeline;
using OrderUnfold.Simulation;
using OrderUnfold.Units;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold demo</c>: the whole job on the built-in simulated demo data.</summary>
public sealed class DemoCommand : ICommand
{
    public string Name => "demo";
    public string Summary => "run the whole job on the built-in demo (simulated data) and compare with the truth";

    public string Usage => """
        orderunfold demo [--out DIR] [--data DIR] [--no-plots] [--quiet]

        Unfolds the demo measurement in data/demo (simulated: a dual-wavelength fibre laser seen by two
        cavities of 100.0 mm and 93.7 mm; see data/demo/README.md), writes the outputs to DIR (default
        ./demo-output) and prints the lines found beside the simulated truth.
        """;

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args, ["out", "data"], ["no-plots", "quiet"]);
        a.NoMorePositionals(0);
        var dataDir = a.Value("data") ?? LocateDemo() ?? throw new InputException("the demo data folder (data/demo) was not found next to the program or above the working directory; pass --data DIR");
        var setup = Path.Combine(dataDir, "setup.toml");
        var outDir = Path.GetFullPath(a.Value("out") ?? "demo-output");
        stdout.WriteLine("OrderUnfold demo: SIMULATED data (a dual-wavelength fibre laser under test, an invented scenario)");
        stdout.WriteLine($"data: {dataDir}");
        var run = UnfoldPipeline.Run(setup, new StderrProgress(stderr, a.Flag("quiet")));
        using (var staged = Io.StagedFolder.Create(outDir)) // complete or absent (Io/StagedFolder.cs)
        {
            UnfoldOutputs.Write(run, staged.Path, figures: a.Flag("no-plots") ? null : new FigureWriter(), toolVersion: Cli.Version);
            staged.Publish(OutputNames.Report);
        }

        if (a.Flag("quiet")) Commands.Summary.UnfoldBrief(run, stdout);
        else Commands.Summary.Unfold(run, stdout);
        var truthPath = Path.Combine(dataDir, "truth.csv");
        if (File.Exists(truthPath))
        {
            var truth = SimulationFiles.ReadTruth(truthPath);
            stdout.WriteLine();
            stdout.WriteLine("found versus simulated truth (relative to the strongest line):");
            stdout.WriteLine("  true frequency     found frequency    difference    true int.  found int.");
            var missing = 0;
            foreach (var t in truth)
            {
                var best = run.Result.Lines.MinBy(l => Math.Abs(l.FrequencyHz - t.FrequencyHz));
                if (best is null || Math.Abs(best.FrequencyHz - t.FrequencyHz) > 3 * run.Instruments.Min(i => i.LinewidthHz))
                {
                    missing++;
                    stdout.WriteLine($"  {Quantity.FormatFrequency(t.FrequencyHz, 7),-18} {"not found",-18}");
                    continue;
                }

                stdout.WriteLine($"  {Quantity.FormatFrequency(t.FrequencyHz, 7),-18} {Quantity.FormatFrequency(best.FrequencyHz, 7),-18} {Quantity.FormatFrequency(best.FrequencyHz - t.FrequencyHz, 3),-13} {t.Intensity,9:F3}  {best.Intensity,9:F3}");
            }

            var extra = run.Result.Lines.Count - (truth.Count - missing);
            stdout.WriteLine(missing == 0 && extra <= 0
                ? $"all {truth.Count} simulated lines found, no extra line"
                : $"{truth.Count - missing} of {truth.Count} simulated lines found; {Math.Max(0, extra)} extra line(s)");
        }

        stdout.WriteLine($"outputs: {outDir}");
        return ExitCodes.Ok;
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
