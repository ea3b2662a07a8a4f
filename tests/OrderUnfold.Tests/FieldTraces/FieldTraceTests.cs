using System.Diagnostics;
using System.Text.Json;
using OrderUnfold.Pipeline;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.FieldTraces;

/// <summary>
/// The whole pipeline on each trace of the field-trace set (simulated outside this project), from the raw files, with
/// a setup written only from what the set's README says a user knows. Every expected value and tolerance below comes
/// from `shared/field-traces/README.md` and the trace's `truth.json` (named beside each check).
/// </summary>
public class FieldTraceTests(ITestOutputHelper output)
{
    private sealed class Checks(ITestOutputHelper output, string trace)
    {
        private readonly List<string> _failed = [];

        public void That(bool ok, string what)
        {
            output.WriteLine($"{trace}: {(ok ? "ok  " : "FAIL")} {what}");
            if (!ok) _failed.Add(what);
        }

        public void Within(double got, double expected, double relTol, string what) =>
            That(Math.Abs(got / expected - 1) <= relTol, $"{what}: {got:G5} vs {expected:G5} (±{relTol:P0})");

        public void Done() => Assert.True(_failed.Count == 0, $"{trace}: " + string.Join("; ", _failed));
    }

    private (UnfoldRun Run, Checks Checks) Unfold(string trace, string setup)
    {
        var path = FieldTraceSet.Prepare(trace, setup);
        var cpu = Process.GetCurrentProcess().TotalProcessorTime;
        var sw = Stopwatch.StartNew();
        var run = FieldTraceSet.Run(path);
        output.WriteLine($"{trace}: {sw.Elapsed.TotalSeconds:F1} s wall, {(Process.GetCurrentProcess().TotalProcessorTime - cpu).TotalSeconds:F1} s CPU (process)");
        foreach (var i in run.Instruments) output.WriteLine($"{trace}: instrument {i}");
        foreach (var l in run.Result.Lines)
            output.WriteLine($"{trace}: line {l.FrequencyHz / 1e6:F3} MHz ± {l.FrequencySigmaHz / 1e6:F3}, intensity {l.Intensity:F3}, SNR {l.Snr:F0}, {l.Verdict}");
        foreach (var w in run.AllWarnings) output.WriteLine($"{trace}: warning: {w}");
        return (run, new Checks(output, trace));
    }

    private static double Get(JsonElement e, params string[] path)
    {
        foreach (var p in path) e = e.GetProperty(p);
        return e.GetDouble();
    }

    [Fact]
    public void T03_ShortScopeSingle()
    {
        // README 03: handheld 8-bit scope, 2 GHz confocal interferometer, finesse about 30, 600 points at 4 µs, no ramp
        const string setup = """
            [[instrument]]
            name = "sfpi"
            geometry = "confocal"
            fsr = "2 GHz"
            finesse = 30
            [[sweep]]
            instrument = "sfpi"
            file = "scope_ch1.csv"
            y_column = 2
            sample_interval = "4 us"
            """;
        var truth = FieldTraceSet.Truth("03_short_scope_single");
        var (run, check) = Unfold("03_short_scope_single", setup);
        // truth.json tolerances.lines: exactly one line
        check.That(run.Result.Lines.Count == 1, $"exactly one line (got {run.Result.Lines.Count})");
        // truth.json true.fsr_in_time_units_mean_s, tolerance fsr_in_scan_units_rel 1 %
        check.Within(FieldTraceSet.MeanPeriod(run, "sfpi"), Get(truth, "true", "fsr_in_time_units_mean_s"), 0.01, "FSR in seconds");
        // truth.json true.cavity.finesse 31.5, tolerance finesse_rel 20 %
        check.Within(run.Instruments[0].Finesse, Get(truth, "true", "cavity", "finesse"), 0.20, "finesse");
        check.Done();
    }

    [Fact]
    public void T02_ShortScopeTwoModes()
    {
        // README 02: same scope and interferometer, a gas laser on two longitudinal modes, ~1.9 FSR, decimal commas
        const string setup = """
            [[instrument]]
            name = "sfpi"
            geometry = "confocal"
            fsr = "2 GHz"
            finesse = 30
            [[sweep]]
            instrument = "sfpi"
            file = "scope_ch1.csv"
            y_column = 2
            sample_interval = "4 us"
            """;
        var truth = FieldTraceSet.Truth("02_short_scope_two_modes");
        var (run, check) = Unfold("02_short_scope_two_modes", setup);
        var fsr = run.Instruments[0].FsrHz;
        var lines = run.Result.Lines;
        check.That(lines.Count == 2, $"two lines per FSR (got {lines.Count})");
        if (lines.Count == 2)
        {
            var weak = lines.MinBy(l => l.Intensity)!;
            // truth.json true.mode_spacing_fsr 0.30, tolerance mode_spacing_abs_fsr 0.01 (modulo the FSR: either sign)
            var folded = FieldTraceSet.Folded(weak.FrequencyHz, fsr);
            check.That(FieldTraceSet.FoldedDistance(folded, 0.30) <= 0.01 || FieldTraceSet.FoldedDistance(folded, 0.70) <= 0.01,
                $"second mode at ±0.30 FSR modulo the FSR (got {folded:F4})");
            // truth.json source_lines[1].intensity_rel_strongest 0.66, tolerance intensity_ratio_rel 15 %
            check.Within(weak.Intensity, truth.GetProperty("true").GetProperty("source_lines")[1].GetProperty("intensity_rel_strongest").GetDouble(), 0.15, "intensity ratio");
        }

        // truth.json tolerances.must_report_modulo_FSR_ambiguity
        check.That(!run.Result.OrdersResolved && lines.All(l => l.Verdict == OrderUnfold.Analysis.OrderVerdict.Unknown), "the modulo-FSR ambiguity is reported (orders unknown)");
        check.Within(FieldTraceSet.MeanPeriod(run, "sfpi"), Get(truth, "true", "fsr_in_time_units_mean_s"), 0.01, "FSR in seconds");
        check.Within(run.Instruments[0].Finesse, Get(truth, "true", "cavity", "finesse"), 0.20, "finesse");
        check.Done();
    }

    [Fact]
    public void T04_OpenLaserFourModes()
    {
        // README 04: datasheet FSR 2.0 GHz (truly 2.2 GHz), finesse about 25, 1000 noisy 8-bit points, settings preamble
        const string setup = """
            [[instrument]]
            name = "sfpi"
            geometry = "confocal"
            fsr = "2 GHz"
            finesse = 25
            [[sweep]]
            instrument = "sfpi"
            file = "open_laser.csv"
            x_column = "TIME"
            y_column = "CH1"
            """;
        var truth = FieldTraceSet.Truth("04_open_laser_four_modes");
        var (run, check) = Unfold("04_open_laser_four_modes", setup);
        var fsr = run.Instruments[0].FsrHz;
        var lines = run.Result.Lines;
        check.That(lines.Count == 4, $"exactly four lines per FSR (got {lines.Count})");
        // truth.json true.mode_spacing_fsr 0.0973, tolerance mode_spacing_abs_fsr 0.003; powers 0.42 : 1 : 0.78 : 0.24 (±25 %)
        var spacing = Get(truth, "true", "mode_spacing_fsr");
        var expected = new[] { (-1, 0.42), (1, 0.78), (2, 0.24) };
        foreach (var (mode, power) in expected)
        {
            var want = FieldTraceSet.Folded(mode * spacing, 1);
            var match = lines.Where(l => FieldTraceSet.FoldedDistance(FieldTraceSet.Folded(l.FrequencyHz, fsr), want) <= 0.003).ToList();
            check.That(match.Count == 1, $"mode {mode:+0;-0} at {mode * spacing:F4} FSR (±0.003)");
            if (match.Count == 1) check.Within(match[0].Intensity, power, 0.25, $"mode {mode:+0;-0} power");
        }

        check.Within(FieldTraceSet.MeanPeriod(run, "sfpi"), Get(truth, "true", "fsr_in_time_units_mean_s"), 0.01, "FSR in seconds");
        check.Within(run.Instruments[0].Finesse, Get(truth, "true", "cavity", "finesse"), 0.20, "finesse");
        check.Done();
    }

    [Fact]
    public void T06_PlaneLowFinesse()
    {
        // README 06: plane etalon, FSR 64 GHz, finesse about 8, stepped by a DAC (300 rows dac_code, detector_V)
        const string setup = """
            [[instrument]]
            name = "etalon"
            fsr = "64 GHz"
            finesse = 8
            [[sweep]]
            instrument = "etalon"
            file = "stepscan.csv"
            x_column = "dac_code"
            y_column = "detector_V"
            scan = "ramp"
            """;
        var truth = FieldTraceSet.Truth("06_plane_low_finesse");
        var (run, check) = Unfold("06_plane_low_finesse", setup);
        check.That(run.Result.Lines.Count == 1, $"exactly one line (got {run.Result.Lines.Count})");
        // truth.json true.mean_fsr_in_dac_codes 1380, tolerance 2 %
        check.Within(FieldTraceSet.MeanPeriod(run, "etalon"), Get(truth, "true", "mean_fsr_in_dac_codes"), 0.02, "FSR in DAC codes");
        // README 06: cavity finesse 7.8 (apparent 7.26 with the line width), tolerance 15 %
        check.Within(run.Instruments[0].Finesse, 7.8, 0.15, "finesse");
        check.Done();
    }
}
