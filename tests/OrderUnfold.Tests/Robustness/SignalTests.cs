using System.Diagnostics;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Robustness;

/// <summary>
/// Ctrl-C (SIGINT) and SIGTERM sent to the command-line program as a separate process (as a shell or a job scheduler
/// would): it ends within 5 s with 130 or 143 and publishes no partial output folder. Linux only (signals by kill(1)).
/// </summary>
[Collection("robustness")]
public class SignalTests(ITestOutputHelper output)
{
    private static string CliDll => Path.Combine(AppContext.BaseDirectory, "OrderUnfold.Cli.dll");

    private static string DemoData()
    {
        for (var dir = new DirectoryInfo(AppContext.BaseDirectory); dir is not null; dir = dir.Parent)
            if (File.Exists(Path.Combine(dir.FullName, "data", "demo", "setup.toml"))) return Path.Combine(dir.FullName, "data", "demo");
        throw new InvalidOperationException("data/demo not found above the test folder");
    }

    /// <summary>Starts the program, waits <paramref name="after"/>, sends <paramref name="signal"/>; returns the exit code and the seconds it took to end.</summary>
    private (int Code, double Seconds, string Err) RunAndSignal(string signal, TimeSpan after, params string[] args)
    {
        var start = new ProcessStartInfo("dotnet") { RedirectStandardError = true, RedirectStandardOutput = true, UseShellExecute = false };
        start.ArgumentList.Add(CliDll);
        foreach (var a in args) start.ArgumentList.Add(a);
        using var p = Process.Start(start)!;
        var err = p.StandardError.ReadToEndAsync();
        var stdout = p.StandardOutput.ReadToEndAsync();
        Assert.False(p.WaitForExit(after), "the command finished before the signal; the test needs a longer job");
        using (var kill = Process.Start("kill", ["-" + signal, p.Id.ToString(System.Globalization.CultureInfo.InvariantCulture)])) kill!.WaitForExit();
        var clock = Stopwatch.StartNew();
        var ended = p.WaitForExit(TimeSpan.FromSeconds(20));
        var seconds = clock.Elapsed.TotalSeconds;
        if (!ended) p.Kill(entireProcessTree: true);
        Assert.True(ended, "the command did not end within 20 s of the signal");
        output.WriteLine($"{signal}: exit {p.ExitCode} after {seconds:F2} s\n{err.Result}\n{stdout.Result}");
        return (p.ExitCode, seconds, err.Result);
    }

    [Theory]
    [InlineData("TERM", 143)]
    [InlineData("INT", 130)]
    public void UnfoldStopsWithinFiveSecondsAndPublishesNothing(string signal, int expected)
    {
        if (!OperatingSystem.IsLinux()) return;
        var root = Path.Combine(Path.GetTempPath(), "orderunfold-signal-" + Guid.NewGuid().ToString("N")[..8]);
        try
        {
            var outDir = Path.Combine(root, "demo-out");
            var (code, seconds, _) = RunAndSignal(signal, TimeSpan.FromSeconds(2.5), "demo", "--data", DemoData(), "--out", outDir, "--quiet");
            Assert.Equal(expected, code);
            Assert.True(seconds < 5, $"took {seconds:F2} s to stop");
            Assert.False(Directory.Exists(outDir), "a partial output folder was published");
            Assert.True(RobustnessFolder.NoStagingLeft(outDir), "a staging folder was left");
        }
        finally
        {
            if (Directory.Exists(root)) Directory.Delete(root, recursive: true);
        }
    }

    [Fact]
    public void SimulateArchiveStopsOnSigtermAndPublishesNothing()
    {
        if (!OperatingSystem.IsLinux()) return;
        var root = Path.Combine(Path.GetTempPath(), "orderunfold-signal-" + Guid.NewGuid().ToString("N")[..8]);
        try
        {
            var outDir = Path.Combine(root, "archive");
            var (code, seconds, _) = RunAndSignal("TERM", TimeSpan.FromSeconds(1.5), "simulate-archive", "--out", outDir, "--items", "2000");
            Assert.Equal(143, code);
            Assert.True(seconds < 5, $"took {seconds:F2} s to stop");
            Assert.False(Directory.Exists(outDir));
            Assert.True(RobustnessFolder.NoStagingLeft(outDir));
        }
        finally
        {
            if (Directory.Exists(root)) Directory.Delete(root, recursive: true);
        }
    }
}
