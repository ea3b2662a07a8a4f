using OrderUnfold.Io;
using Xunit;

namespace OrderUnfold.Tests.CommandLine;

/// <summary><c>simulate</c> options for what real data contain. All data simulated.</summary>
public sealed class SimulateOptionsTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("orderunfold-cli-sim-").FullName;

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); }
        catch (IOException) { }
    }

    private static (int Code, string Out, string Err) Run(params string[] args) => CliRun.Run(args);

    [Fact]
    public void Help_lists_every_new_option()
    {
        var help = Run("help", "simulate");
        Assert.Equal(0, help.Code);
        foreach (var option in new[] { "--sample-interval", "--families", "--ring-down", "--full-scale", "--stated-fsr-factor", "--stated-finesse-factor", "--split-channels" })
            Assert.Contains(option, help.Out);
    }

    [Fact]
    public void All_effects_together_write_files_the_reader_takes()
    {
        var dir = Path.Combine(_dir, "all");
        var sim = Run("simulate", "--out", dir, "--scenario", "single", "--lines", "0 GHz:1", "--samples", "6000",
            "--sample-interval", "4 ns", "--finesse", "300", "--families", "0.532:1.85, 0.064:0.3", "--ring-down",
            "--full-scale", "0.9", "--stated-fsr-factor", "1.02", "--stated-finesse-factor", "3", "--split-channels");
        Assert.True(sim.Code == 0, sim.Err);
        var setup = SetupReader.Read(Path.Combine(dir, "setup.toml"));
        Assert.Equal(900, setup.Instruments[0].Finesse!.Value, 9);
        var sweeps = SweepReader.ReadSweeps(setup.Sweeps[0].File);
        Assert.Equal([RampDirection.Up, RampDirection.Down], sweeps.Select(s => s.Direction));
        Assert.Contains(sweeps, s => s.ClippedSamples.Length > 0);
        Assert.All(sweeps, s => Assert.NotNull(s.QuantisationStep));
    }

    [Theory]
    [InlineData("--families", "0.5")]
    [InlineData("--families", "1.2:0.5")]
    [InlineData("--families", "0.3:-1")]
    [InlineData("--full-scale", "0")]
    [InlineData("--stated-fsr-factor", "-1")]
    [InlineData("--sample-interval", "2 GHz")]
    [InlineData("--lines", "0 GHz:1:-3 MHz")]
    public void Bad_values_are_usage_errors(string option, string value)
    {
        var r = Run("simulate", "--out", Path.Combine(_dir, "bad"), option, value);
        Assert.Equal(2, r.Code);
        Assert.Contains(option, r.Err);
    }

    [Fact]
    public void Ring_down_with_line_widths_is_refused()
    {
        var r = Run("simulate", "--out", Path.Combine(_dir, "bad"), "--lines", "0 GHz:1:5 MHz", "--ring-down");
        Assert.Equal(2, r.Code);
        Assert.Contains("--ring-down", r.Err);
    }
}
