using OrderUnfold.Instruments;
using OrderUnfold.Simulation;

// Namespace deliberately not OrderUnfold.Tests.Cli: a namespace named Cli under OrderUnfold.Tests would hide the
// OrderUnfold.Cli.Cli class from other test folders that write Cli.Cli.Run.
namespace OrderUnfold.Tests.CommandLine;

/// <summary>
/// A temporary folder holding a small simulated measurement (two planar cavities, 100.0 mm and 93.7 mm, finesse 150,
/// triangle ramp over 4 FSRs, 4 000 samples per record; SIMULATED DATA) written by <see cref="SimulationFiles.Write"/>:
/// A_source.csv, A_calibration.csv, B_source.csv, B_calibration.csv and setup.toml. Tests copy it and inject faults.
/// </summary>
public sealed class CliTestFolder : IDisposable
{
    public CliTestFolder()
    {
        Root = Path.Combine(Path.GetTempPath(), "orderunfold-cli-tests-" + Guid.NewGuid().ToString("N")[..12]);
        Base = Path.Combine(Root, "base");
        SimulationFiles.Write(Spec(spanFsr: 4, samples: 4000), Base);
    }

    /// <summary>Root of everything this fixture wrote (deleted on dispose).</summary>
    public string Root { get; }

    /// <summary>The pristine simulated case.</summary>
    public string Base { get; }

    public static SimulationSpec Spec(double spanFsr, int samples) => new()
    {
        Label = "SIMULATED DATA: OrderUnfold CLI tests",
        Lines = [new SimulatedLine(0, 1.0), new SimulatedLine(0.45e9, 0.4), new SimulatedLine(2.2e9, 0.6)],
        Cavities =
        [
            new SimulatedCavity { Instrument = Instrument.FromLength("A", 0.1000, CavityGeometry.Planar, 150), SpanFsr = spanFsr, Samples = samples, Gain = 0.9 },
            new SimulatedCavity { Instrument = Instrument.FromLength("B", 0.0937, CavityGeometry.Planar, 150), SpanFsr = spanFsr, Samples = samples, Gain = 1.1, Quadratic = 0.04, Cubic = -0.015 },
        ],
        Seed = 17,
    };

    /// <summary>A fresh copy of the base case in its own folder.</summary>
    public string Copy(string name)
    {
        var dir = Path.Combine(Root, name);
        Directory.CreateDirectory(dir);
        foreach (var f in Directory.GetFiles(Base)) File.Copy(f, Path.Combine(dir, Path.GetFileName(f)), overwrite: true);
        return dir;
    }

    public void Dispose()
    {
        try
        {
            Directory.Delete(Root, recursive: true);
        }
        catch (IOException)
        {
            // best effort: a temp folder left behind is harmless
        }
    }
}
