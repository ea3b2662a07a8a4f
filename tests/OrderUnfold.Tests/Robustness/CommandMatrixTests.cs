using Xunit;
using static OrderUnfold.Tests.Robustness.RobustnessFolder;

namespace OrderUnfold.Tests.Robustness;

/// <summary>
/// Every command × plots on/off × the axis calibration from a saved file, from calibration sweeps or from the source
/// itself (self-calibration), on small simulated data: the exit code is as documented and the output folder is complete
/// (its last-written file is present) or absent — never partial, never a staging folder left beside it. A bad-input
/// variant of each command checks the absent side.
/// </summary>
[Collection("robustness")]
public class CommandMatrixTests(RobustnessFolder fx) : IClassFixture<RobustnessFolder>
{
    public static TheoryData<string, bool, string> UnfoldCases()
    {
        var d = new TheoryData<string, bool, string>();
        foreach (var command in new[] { "unfold", "calibrate", "batch" })
        foreach (var plots in new[] { true, false })
        foreach (var calibration in new[] { "saved", "sweep", "self" })
            if (!(command == "calibrate" && calibration == "saved"))
                d.Add(command, plots, calibration);
        return d;
    }

    /// <summary>A copy of the base case whose axes come from <paramref name="calibration"/>.</summary>
    private string Case(string name, string calibration)
    {
        var dir = fx.Copy(name);
        if (calibration == "self")
        {
            // no [[calibration]] tables: the axes come from the source sweeps (self_calibrate = "auto")
            var setup = Path.Combine(dir, "setup.toml");
            var keep = new List<string>();
            var skipping = false;
            foreach (var line in File.ReadAllLines(setup))
            {
                if (line.StartsWith("[", StringComparison.Ordinal)) skipping = line.Trim() == "[[calibration]]";
                if (!skipping) keep.Add(line);
            }

            File.WriteAllLines(setup, keep);
        }

        return dir;
    }

    private static void CompleteOrAbsent(string folder, string marker, int code)
    {
        Assert.True(NoStagingLeft(folder), $"a staging folder was left beside {folder}");
        if (code is 0 or 1) Assert.True(File.Exists(Path.Combine(folder, marker)), $"{folder} lacks {marker}");
        else Assert.False(Directory.Exists(folder) && Directory.EnumerateFileSystemEntries(folder).Any(), $"{folder} is partial");
    }

    [Theory]
    [MemberData(nameof(UnfoldCases))]
    public void UnfoldCalibrateAndBatch(string command, bool plots, string calibration)
    {
        var dir = Case($"m-{command}-{plots}-{calibration}", calibration);
        var setup = Path.Combine(dir, "setup.toml");
        var output = Path.Combine(dir, "out");
        var (code, _, err) = command switch
        {
            "unfold" => RunCli(["unfold", setup, "--out", output, "--quiet", .. plots ? Array.Empty<string>() : ["--no-plots"],
                .. calibration == "saved" ? new[] { "--calibration", fx.Calibration } : []]),
            "calibrate" => RunCli(["calibrate", setup, "--out", output, "--quiet", .. plots ? Array.Empty<string>() : ["--no-plots"]]),
            _ => Batch(dir, setup, output, plots, calibration),
        };
        Assert.True(code == 0, $"{command} exit {code}: {err}");
        CompleteOrAbsent(output, command switch { "unfold" => "report.json", "calibrate" => "calibration-report.json", _ => "summary.csv" }, code);
        if (command == "batch") Assert.True(File.Exists(Path.Combine(output, "items", "one", "report.json")));
        if (command == "unfold") Assert.Equal(plots, File.Exists(Path.Combine(output, "spectrum.png")));

        // the bad-input side: a damaged source sweep → exit 2 (1 for a batch item), nothing partial
        File.WriteAllText(Path.Combine(dir, "A_source.csv"), "time_s,ramp_V,signal_V\n0,0,oops\n");
        var broken = Path.Combine(dir, "out-broken");
        var bad = command switch
        {
            "unfold" => RunCli(["unfold", setup, "--out", broken, "--quiet", .. plots ? Array.Empty<string>() : ["--no-plots"],
                .. calibration == "saved" ? new[] { "--calibration", fx.Calibration } : []]),
            "calibrate" => RunCli(["calibrate", setup, "--out", broken, "--quiet", .. plots ? Array.Empty<string>() : ["--no-plots"]]),
            _ => Batch(dir, setup, broken, plots, calibration),
        };
        Assert.Equal(command == "batch" ? 1 : 2, bad.Code);
        CompleteOrAbsent(broken, command switch { "unfold" => "report.json", "calibrate" => "calibration-report.json", _ => "summary.csv" }, bad.Code);
        if (command == "batch") Assert.False(File.Exists(Path.Combine(broken, "items", "one", "report.json")));
    }

    private (int Code, string Out, string Err) Batch(string dir, string setup, string output, bool plots, string calibration)
    {
        var manifest = Path.Combine(dir, "manifest.csv");
        var cal = calibration == "saved" ? Path.Combine(dir, "saved-calibration.json") : null;
        if (cal is not null) File.Copy(fx.Calibration, cal, overwrite: true);
        File.WriteAllText(manifest, "id,setup,calibration\none,setup.toml," + (cal is null ? "" : "saved-calibration.json") + "\n");
        return RunCli(["batch", manifest, "--out", output, "--jobs", "1", "--quiet", .. plots ? new[] { "--plots" } : []]);
    }

    [Theory]
    [InlineData(true)]
    [InlineData(false)]
    public void ModesTrackMergePlanSimulateInit(bool plots)
    {
        var root = fx.NewPath($"m-other-{plots}");
        Directory.CreateDirectory(root);
        var dir = fx.Copy($"m-other-case-{plots}");
        var unfolded = Path.Combine(dir, "out");
        Assert.Equal(0, RunCli("unfold", Path.Combine(dir, "setup.toml"), "--out", unfolded, "--quiet", "--no-plots").Code);

        // modes writes beside the unfold's outputs
        var modes = RunCli(["modes", unfolded, .. plots ? Array.Empty<string>() : ["--no-plots"]]);
        Assert.True(modes.Code == 0, modes.Err);
        Assert.True(File.Exists(Path.Combine(unfolded, "modes.json")));
        Assert.Equal(2, RunCli("modes", Path.Combine(root, "no-such-folder")).Code);

        // batch in shards, merge, track
        var batch = Path.Combine(root, "batch");
        var manifest = Path.Combine(fx.Archive, "manifest.csv");
        foreach (var shard in new[] { "0/2", "1/2" })
            Assert.True(RunCli(["batch", manifest, "--out", batch, "--shard", shard, "--jobs", "1", "--quiet", .. plots ? new[] { "--plots" } : []]).Code is 0 or 1);
        var merge = RunCli("merge", batch);
        Assert.True(merge.Code is 0 or 1, merge.Err);
        CompleteOrAbsent(batch, "summary.csv", merge.Code);
        Assert.Equal(2, RunCli("merge", Path.Combine(root, "no-batch")).Code);
        var track = RunCli(["track", batch, "--out", Path.Combine(root, "track"), .. plots ? Array.Empty<string>() : ["--no-plots"]]);
        Assert.True(track.Code == 0, track.Err);
        CompleteOrAbsent(Path.Combine(root, "track"), "series.csv", track.Code);
        var badTrack = RunCli("track", Path.Combine(root, "no-batch"), "--out", Path.Combine(root, "track-bad"));
        Assert.Equal(2, badTrack.Code);
        CompleteOrAbsent(Path.Combine(root, "track-bad"), "series.csv", badTrack.Code);

        // plan (writes its plots always), simulate, simulate-archive, init
        var plan = RunCli("plan", "--first-length", "100 mm", "--finesse", "150", "--span", "10 GHz", "--second-length", "93.7 mm", "--out", Path.Combine(root, "plan"));
        Assert.True(plan.Code is 0 or 1, plan.Err);
        CompleteOrAbsent(Path.Combine(root, "plan"), "plan.csv", plan.Code);
        var badPlan = RunCli("plan", "--first-length", "100 mm", "--finesse", "150", "--span", "10 GHz", "--catalogue", Path.Combine(root, "none.txt"), "--out", Path.Combine(root, "plan-bad"));
        Assert.Equal(2, badPlan.Code);
        CompleteOrAbsent(Path.Combine(root, "plan-bad"), "plan.csv", badPlan.Code);
        var sim = RunCli("simulate", "--out", Path.Combine(root, "sim"), "--samples", "2000");
        Assert.Equal(0, sim.Code);
        CompleteOrAbsent(Path.Combine(root, "sim"), "setup.toml", sim.Code);
        var badSim = RunCli("simulate", "--out", Path.Combine(root, "sim-bad"), "--lines", "banana");
        Assert.Equal(2, badSim.Code);
        CompleteOrAbsent(Path.Combine(root, "sim-bad"), "setup.toml", badSim.Code);
        var arc = RunCli("simulate-archive", "--out", Path.Combine(root, "arc"), "--items", "3");
        Assert.Equal(0, arc.Code);
        CompleteOrAbsent(Path.Combine(root, "arc"), "manifest.csv", arc.Code);
        Assert.Equal(0, RunCli("init", Path.Combine(root, "new-setup.toml")).Code);
        Assert.Equal(2, RunCli("init", Path.Combine(root, "new-setup.toml")).Code); // exists: not overwritten
    }

    [Fact]
    public void DemoCompleteOrAbsent()
    {
        var output = fx.NewPath("demo");
        var demo = RunCli("demo", "--out", output, "--no-plots", "--quiet");
        Assert.True(demo.Code == 0, demo.Err);
        CompleteOrAbsent(output, "report.json", demo.Code);
        var bad = RunCli("demo", "--out", fx.NewPath("demo-bad"), "--data", fx.NewPath("no-data"));
        Assert.Equal(2, bad.Code);
    }
}
