using OrderUnfold.Pipeline;
using OrderUnfold.Units;

namespace OrderUnfold.Cli.Commands;

/// <summary>Plain-text summaries printed by the commands.</summary>
internal static class Summary
{
    /// <summary>The --quiet summary: one line (the table and warnings are in lines.csv and report.json).</summary>
    public static void UnfoldBrief(UnfoldRun run, TextWriter o)
    {
        var r = run.Result;
        var warnings = run.AllWarnings.Count();
        o.WriteLine($"{r.Lines.Count} line(s); orders {(r.OrdersResolved ? "resolved" : "unknown (one instrument)")}; reduced χ² {r.ReducedChiSquare:F2}" +
                    (warnings > 0 ? $"; {warnings} warning(s) in report.json" : ""));
    }

    public static void Unfold(UnfoldRun run, TextWriter o)
    {
        var r = run.Result;
        o.WriteLine($"instruments: {string.Join("; ", run.Instruments.Select(i => i.ToString()))}");
        foreach (var c in run.Calibrations)
            o.WriteLine($"axis {c.Instrument} ({c.Direction.ToString().ToLowerInvariant()}): {c.Method}, degree {c.Axis.Degree}, {c.PointCount} points, residual RMS {Quantity.FormatFrequency(c.ResidualRmsHz)}"
                        + (c.Finesse is double f ? $", finesse {f:F0}" : ""));
        foreach (var s in r.Sweeps)
            o.WriteLine($"sweep {s.Name}: {s.Samples} samples, reduced χ² {s.ReducedChiSquare:F2}");
        o.WriteLine(r.OrdersResolved
            ? $"{r.Grid.Count} bins of {Quantity.FormatFrequency(r.Grid.StepHz)}; {UnfoldOutputs.UnambiguousText(run)}"
            // the instrument's FSR as reported above (an FSR refinement may end with a last correction too small to re-unfold for)
            : $"one instrument only: spectrum folded into one FSR ({Quantity.FormatFrequency(run.Instruments.Count == 1 ? run.Instruments[0].FsrHz : r.UnambiguousRangeHz)}); orders unknown");
        o.WriteLine($"solver: {r.Solver.Status.ToString().ToLowerInvariant()} after {r.Solver.Iterations} iterations; reduced χ² {r.ReducedChiSquare:F2}");
        var anchor = run.Setup.Solve.AnchorFrequencyHz;
        o.WriteLine($"{r.Lines.Count} line(s), frequencies relative to the strongest line" + (anchor is double a ? $" (anchored at {Quantity.FormatFrequency(a, 10)})" : "") + ":");
        o.WriteLine("  frequency            ± sigma        intensity   ± sigma     SNR   order");
        foreach (var l in r.Lines)
        {
            var sig = l.FrequencySigmaHz is double fs ? Quantity.FormatFrequency(fs, 2) : "n/a";
            o.WriteLine($"  {Quantity.FormatFrequency(l.FrequencyHz, 7),-20} {sig,-14} {l.Intensity,9:F4}   {l.IntensityError,7:F4} {l.Snr,7:F0}   {UnfoldOutputs.Verdict(run, l)}");
        }

        foreach (var w in run.AllWarnings) o.WriteLine($"warning: {w}");
    }
}

/// <summary>Progress lines on standard error.</summary>
internal sealed class StderrProgress(TextWriter err, bool quiet) : IProgress<string>
{
    private readonly System.Diagnostics.Stopwatch _clock = System.Diagnostics.Stopwatch.StartNew();

    public void Report(string value)
    {
        if (!quiet) err.WriteLine($"... {_clock.Elapsed.TotalSeconds,6:F1} s (cpu {System.Diagnostics.Process.GetCurrentProcess().TotalProcessorTime.TotalSeconds,5:F1} s)  {value}");
    }
}
