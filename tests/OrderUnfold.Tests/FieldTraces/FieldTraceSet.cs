using System.Text.Json;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;

namespace OrderUnfold.Tests.FieldTraces;

/// <summary>
/// The field-trace set: traces simulated outside this project (`shared/field-traces/NN/`, each with `truth.json`
/// and a README of what a user would know), read at test time from the folder beside the repository, never copied
/// into it. Each test writes a setup from what the README says a user knows, copies the raw files into a temporary
/// folder beside it (setup paths stay inside the setup's folder), runs the whole pipeline and checks the truth.
/// </summary>
internal static class FieldTraceSet
{
    /// <summary>`&lt;repository&gt;/../shared/field-traces` (or ORDERUNFOLD_FIELD_TRACES when set).</summary>
    public static string Root
    {
        get
        {
            var env = Environment.GetEnvironmentVariable("ORDERUNFOLD_FIELD_TRACES");
            if (!string.IsNullOrEmpty(env)) return env;
            var dir = new DirectoryInfo(AppContext.BaseDirectory);
            while (dir is not null && !File.Exists(Path.Combine(dir.FullName, "OrderUnfold.sln"))) dir = dir.Parent;
            if (dir?.Parent is null) throw new InvalidOperationException("repository root (OrderUnfold.sln) not found above the test assembly");
            var root = Path.Combine(dir.Parent.FullName, "shared", "field-traces");
            if (!Directory.Exists(root))
                throw new InvalidOperationException($"the field-trace set is expected at {root} (a copy of shared/ beside the repository, as CI lays it); set ORDERUNFOLD_FIELD_TRACES to its folder otherwise");
            return root;
        }
    }

    /// <summary>The truth of one trace.</summary>
    public static JsonElement Truth(string trace)
    {
        using var doc = JsonDocument.Parse(File.ReadAllText(Path.Combine(Root, trace, "truth.json")));
        return doc.RootElement.Clone();
    }

    /// <summary>Copies the trace's files into a new temporary folder and writes <paramref name="setupToml"/> there.</summary>
    public static string Prepare(string trace, string setupToml)
    {
        var dir = Directory.CreateTempSubdirectory($"field-{trace}-").FullName;
        foreach (var f in Directory.GetFiles(Path.Combine(Root, trace)).Where(f => !f.EndsWith("truth.json")))
            File.Copy(f, Path.Combine(dir, Path.GetFileName(f)));
        var setup = Path.Combine(dir, "setup.toml");
        File.WriteAllText(setup, setupToml);
        return setup;
    }

    /// <summary>Runs the whole pipeline on a prepared setup, bounded in time (a stage that runs away fails the test
    /// instead of hanging the suite).</summary>
    public static UnfoldRun Run(string setupPath, TimeSpan? limit = null)
    {
        var task = Task.Run(() => UnfoldPipeline.Run(setupPath));
        if (!task.Wait(limit ?? TimeSpan.FromSeconds(120)))
            throw new TimeoutException($"{setupPath}: the unfold did not end within {(limit ?? TimeSpan.FromSeconds(120)).TotalSeconds} s");
        return task.Result;
    }

    /// <summary>
    /// Mean period of the instrument's sweeps in scan units (the FSR in seconds, volts or DAC codes), as the calibrated
    /// axes give it: each sweep's scan span times the FSR over the frequency span the axis assigns to it, averaged
    /// over the sweeps. The truth's "mean FSR in scan units" is the same quantity over the record.
    /// </summary>
    public static double MeanPeriod(UnfoldRun run, string instrument)
    {
        var periods = new List<double>();
        for (var k = 0; k < run.Sweeps.Count; k++)
        {
            var s = run.Sweeps[k];
            if (s.Instrument.Name != instrument) continue;
            var x = run.RawSweeps[k].X;
            var dx = x.Max() - x.Min();
            var df = Math.Abs(s.ScanHz[^1] - s.ScanHz[0]);
            periods.Add(dx * s.Instrument.FsrHz / df);
        }

        return periods.Average();
    }

    /// <summary>Folded position of a frequency in units of the FSR, in [0, 1).</summary>
    public static double Folded(double hz, double fsrHz)
    {
        var v = hz / fsrHz % 1;
        return v < 0 ? v + 1 : v;
    }

    /// <summary>Circular distance of two folded positions (in FSR units).</summary>
    public static double FoldedDistance(double a, double b)
    {
        var d = Math.Abs(a - b) % 1;
        return Math.Min(d, 1 - d);
    }
}
