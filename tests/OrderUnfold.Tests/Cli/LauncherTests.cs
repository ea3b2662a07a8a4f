using System.Diagnostics;
using Xunit;

namespace OrderUnfold.Tests.Cli;

/// <summary>
/// The repository's <c>orderunfold</c> launcher (README: "export PATH=... && orderunfold demo"): it runs the built
/// program, and the program's next-command hints use the name the user typed.
/// </summary>
public class LauncherTests
{
    [Fact]
    public void OnPathTheHintsSayOrderunfold()
    {
        var root = RepositoryRoot.Folder;
        var output = NewFolder();
        var path = root + ":" + Environment.GetEnvironmentVariable("PATH");
        var (code, stdout, stderr) = Run("orderunfold", path, "simulate", "--out", output, "--samples", "2000", "--span-fsr", "3");
        Assert.True(code == 0, stderr);
        Assert.Contains($"next: orderunfold unfold {Path.Combine(output, "setup.toml")}", stdout);
    }

    [Fact]
    public void ByItsPathTheHintsRepeatThatPath()
    {
        var launcher = Path.Combine(RepositoryRoot.Folder, "orderunfold");
        var output = NewFolder();
        var path = string.Join(':', (Environment.GetEnvironmentVariable("PATH") ?? "").Split(':').Where(d => !File.Exists(Path.Combine(d, "orderunfold"))));
        var (code, stdout, stderr) = Run(launcher, path, "simulate", "--out", output, "--samples", "2000", "--span-fsr", "3");
        Assert.True(code == 0, stderr);
        Assert.Contains($"next: {launcher} unfold", stdout);
    }

    [Fact]
    public void AnUnknownCommandIsOneMessageAndExitTwo()
    {
        var (code, _, stderr) = Run(Path.Combine(RepositoryRoot.Folder, "orderunfold"), Environment.GetEnvironmentVariable("PATH") ?? "", "unfoldd");
        Assert.Equal(2, code);
        Assert.DoesNotContain("   at ", stderr); // no stack trace
    }

    private static (int Code, string Stdout, string Stderr) Run(string program, string path, params string[] arguments)
    {
        // through a shell, as a user types it: the shell looks the name up on the PATH given here
        var start = new ProcessStartInfo("/bin/bash") { RedirectStandardOutput = true, RedirectStandardError = true, UseShellExecute = false };
        foreach (var a in (string[])["-c", $"exec {program} \"$@\"", "shell", .. arguments]) start.ArgumentList.Add(a);
        start.Environment["PATH"] = path;
        start.Environment.Remove("ORDERUNFOLD_COMMAND");
        using var p = Process.Start(start)!;
        var stdout = p.StandardOutput.ReadToEndAsync();
        var stderr = p.StandardError.ReadToEndAsync();
        if (!p.WaitForExit(TimeSpan.FromMinutes(5)))
        {
            p.Kill(entireProcessTree: true);
            Assert.Fail($"{program} did not finish within 5 minutes");
        }

        return (p.ExitCode, stdout.Result, stderr.Result);
    }

    private static string NewFolder()
    {
        var d = Path.Combine(Path.GetTempPath(), "orderunfold-launcher-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(d);
        return Path.Combine(d, "out");
    }
}
