using System.Globalization;
using Xunit;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>
/// A temporary folder holding what <c>orderunfold simulate</c> writes for the given options (SIMULATED DATA: setup.toml,
/// the records and truth.csv), removed on dispose.
/// </summary>
internal sealed class SimulatedFolder : IDisposable
{
    public SimulatedFolder(params string[] simulateOptions)
    {
        Path = Directory.CreateTempSubdirectory("orderunfold-sim-").FullName;
        var stderr = new StringWriter(CultureInfo.InvariantCulture);
        var code = OrderUnfold.Cli.Cli.Run(["simulate", "--out", Path, .. simulateOptions], new StringWriter(CultureInfo.InvariantCulture), stderr);
        Assert.True(code == 0, stderr.ToString());
    }

    /// <summary>The folder.</summary>
    public string Path { get; }

    /// <summary>The setup the simulation wrote.</summary>
    public string Setup => System.IO.Path.Combine(Path, "setup.toml");

    /// <summary>The simulated lines (truth.csv): frequency and relative intensity, in the file's order.</summary>
    public List<(double Hz, double Intensity)> Truth() =>
        File.ReadLines(System.IO.Path.Combine(Path, "truth.csv")).Where(l => l.Length > 0 && (char.IsAsciiDigit(l[0]) || l[0] == '-'))
            .Select(l => l.Split(','))
            .Select(f => (double.Parse(f[0], CultureInfo.InvariantCulture), double.Parse(f[1], CultureInfo.InvariantCulture)))
            .ToList();

    public void Dispose()
    {
        try { Directory.Delete(Path, recursive: true); }
        catch (IOException) { }
    }
}
