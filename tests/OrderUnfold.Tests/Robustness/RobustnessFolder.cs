using System.Globalization;
using OrderUnfold.Tests.CommandLine;

namespace OrderUnfold.Tests.Robustness;

/// <summary>
/// Shared simulated inputs for the robustness tests (SIMULATED DATA): the two-cavity case of <see cref="CliTestFolder"/>,
/// its saved calibration (written once by the calibrate command), and a small simulated archive (8 items).
/// </summary>
public sealed class RobustnessFolder : IDisposable
{
    private readonly CliTestFolder _cli = new();

    public RobustnessFolder()
    {
        var (code, _, err) = RunCli("calibrate", Path.Combine(_cli.Base, "setup.toml"), "--out", Path.Combine(Root, "cal"), "--no-plots", "--quiet");
        if (code != 0) throw new InvalidOperationException("calibrate failed: " + err);
        Calibration = Path.Combine(Root, "cal", "calibration.json");
        (code, _, err) = RunCli("simulate-archive", "--out", Path.Combine(Root, "archive"), "--items", "8");
        if (code != 0) throw new InvalidOperationException("simulate-archive failed: " + err);
        Archive = Path.Combine(Root, "archive");
    }

    public string Root => _cli.Root;

    /// <summary>calibration.json written by 'calibrate' for the base case.</summary>
    public string Calibration { get; }

    /// <summary>The simulated archive (manifest.csv, calibration.json, setup.toml, sweeps/).</summary>
    public string Archive { get; }

    /// <summary>A fresh copy of the two-cavity base case.</summary>
    public string Copy(string name) => _cli.Copy(name);

    /// <summary>A folder path under the fixture root that does not exist yet.</summary>
    public string NewPath(string name) => Path.Combine(Root, name + "-" + Guid.NewGuid().ToString("N")[..6]);

    /// <summary>Runs the CLI in-process as a user would (same argument parsing, exit codes and messages).</summary>
    public static (int Code, string Out, string Err) RunCli(params string[] args) => CliWith(default, args);

    public static (int Code, string Out, string Err) CliWith(CancellationToken cancel, params string[] args)
    {
        var stdout = new StringWriter(CultureInfo.InvariantCulture);
        var stderr = new StringWriter(CultureInfo.InvariantCulture);
        var code = OrderUnfold.Cli.Cli.Run(args, stdout, stderr, cancel);
        return (code, stdout.ToString(), stderr.ToString());
    }

    /// <summary>True when no hidden staging folder (".NAME.partial-…") is left beside <paramref name="target"/>.</summary>
    public static bool NoStagingLeft(string target)
    {
        var parent = Path.GetDirectoryName(Path.GetFullPath(target))!;
        return !Directory.Exists(parent) || !Directory.EnumerateDirectories(parent, "." + Path.GetFileName(target) + ".partial-*").Any();
    }

    public void Dispose() => _cli.Dispose();
}
