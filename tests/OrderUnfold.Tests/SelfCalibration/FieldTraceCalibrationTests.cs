using OrderUnfold.Tests.FieldTraces;
using System.Text.Json;
using OrderUnfold.Calibration;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.SelfCalibration;

/// <summary>
/// The calibration stage (period, finesse, transverse families) on the field traces simulated outside the project
/// (<c>shared/field-traces</c>, read from <c>&lt;repo root&gt;/../shared/field-traces</c>), from the raw files, with setups
/// written only from what the set's README says a user knows. Every check names its source,
/// <c>shared/field-traces/NN/truth.json</c>, and the README's tolerance.
/// </summary>
public sealed class FieldTraceCalibrationTests(ITestOutputHelper output)
{
    private static string Root() => FieldTraceSet.Root;

    private static string Folder(string prefix) => Directory.GetDirectories(Root()).Single(d => Path.GetFileName(d).StartsWith(prefix, StringComparison.Ordinal));

    private Setup? _setup;

    /// <summary>How the setup reads a file (the same options the pipeline uses).</summary>
    private SweepFileOptions Options(string file) =>
        _setup!.Sweeps.Select(s => s.File).Concat(_setup.Calibrations.Select(c => c.File)).First(f => Path.GetFileName(f.Path) == file);

    private CalibrationSet Calibrate(string toml, out IReadOnlyList<string> warnings)
    {
        var dir = Directory.CreateTempSubdirectory("ou-field-");
        try
        {
            var path = Path.Combine(dir.FullName, "setup.toml");
            File.WriteAllText(path, toml);
            // the raw files stay in shared/field-traces, outside the setup's temporary folder
            using var outside = InputLimits.Use(new InputLimits { AllowOutsidePaths = true });
            var setup = SetupReader.Read(path);
            _setup = setup;
            var set = UnfoldPipeline.Calibrate(setup, null, out warnings);
            foreach (var i in set.Instruments) output.WriteLine($"instrument {i}; finesse measured: {i.FinesseMeasured}");
            foreach (var a in set.Axes)
            {
                output.WriteLine($"axis {a.Instrument} {a.Direction} {a.Source}: {a.Method}, finesse {a.Finesse:F1}");
                if (a.PeriodDecision is { } d) output.WriteLine("  " + d.Summary);
            }

            foreach (var w in warnings) output.WriteLine("warning: " + w);
            return set;
        }
        finally
        {
            dir.Delete(true);
        }
    }

    /// <summary>For every pair of consecutive orders the truth lists for <paramref name="file"/>, the calibrated axis
    /// must put them one FSR apart within <paramref name="tolerance"/> (relative): the FSR in scan units at that pair.</summary>
    private void CheckOrderSpacings(CalibrationSet set, string instrument, string folder, string file, SweepFileOptions options, double tolerance)
    {
        using var truth = JsonDocument.Parse(File.ReadAllText(Path.Combine(folder, "truth.json")));
        var t = truth.RootElement.GetProperty("true");
        var spacings = t.GetProperty("order_spacings");
        var peaks = t.GetProperty("peaks");
        if (spacings.ValueKind == JsonValueKind.Object) spacings = spacings.GetProperty(file);
        if (peaks.ValueKind == JsonValueKind.Object) peaks = peaks.GetProperty(file);
        var segments = UnfoldPipeline.ReadSegments(options);
        var inst = set.Instruments.Single(i => i.Name == instrument);
        var checkedPairs = 0;
        foreach (var s in spacings.EnumerateArray())
        {
            var unit = s.GetProperty("unit").GetString()!;
            var keyFrom = unit switch { "t_s" => "from_t_s", "dac_code" => "from_dac_code", _ => "from_" + unit };
            var keyTo = keyFrom.Replace("from_", "to_", StringComparison.Ordinal);
            var field = keyFrom["from_".Length..];
            double X(double value)
            {
                if (unit != "t_s") return value; // the scan coordinate is the ramp value itself
                // a time scan: x is relative to the segment start; take the peak's sample index from the truth
                var p = peaks.EnumerateArray().First(q => q.TryGetProperty(field, out var v) && Math.Abs(v.GetDouble() - value) < 1e-12);
                var index = p.GetProperty("sample_index").GetDouble();
                var seg = segments.Single(g => index >= g.FirstSample && index < g.FirstSample + g.Count);
                var local = index - seg.FirstSample;
                var i0 = (int)Math.Floor(local);
                return seg.X[i0] + (local - i0) * (seg.X[Math.Min(seg.Count - 1, i0 + 1)] - seg.X[i0]);
            }

            var xa = X(s.GetProperty(keyFrom).GetDouble());
            var xb = X(s.GetProperty(keyTo).GetDouble());
            // the README compares a reported FSR with the pair it was measured from: pairs inside the calibrated range
            var axis = set.Axes.Where(a => a.Instrument == instrument).OrderBy(a => a.FromRepeats ? 1 : 0).First();
            var margin = 0.02 * (axis.Axis.XMax - axis.Axis.XMin);
            if (Math.Min(xa, xb) < axis.Axis.XMin - margin || Math.Max(xa, xb) > axis.Axis.XMax + margin)
            {
                output.WriteLine($"{file}: pair {xa:G6} → {xb:G6} lies outside the calibrated range {axis.Axis.XMin:G6}..{axis.Axis.XMax:G6}: not a pair the FSR was measured from");
                continue;
            }

            var spanFsr = Math.Abs(axis.Axis.Evaluate(xb) - axis.Axis.Evaluate(xa)) / inst.FsrHz;
            output.WriteLine($"{file}: pair {xa:G6} → {xb:G6} ({s.GetProperty("spacing").GetDouble():G6} {unit}): the axis says {spanFsr:F4} FSR");
            // source: shared/field-traces/<folder>/truth.json, true.order_spacings; README: FSR in scan units within the stated tolerance
            Assert.InRange(spanFsr, 1 - tolerance, 1 + tolerance);
            checkedPairs++;
        }

        Assert.True(checkedPairs > 0);
    }

    private static double TruthFinesse(string folder, string? cavity = null)
    {
        using var truth = JsonDocument.Parse(File.ReadAllText(Path.Combine(folder, "truth.json")));
        var c = truth.RootElement.GetProperty("true").GetProperty(cavity is null ? "cavity" : "cavities");
        if (cavity is not null) c = c.EnumerateArray().Single(e => e.GetProperty("tag").GetString() == cavity);
        return c.GetProperty("finesse").GetDouble();
    }

    [Fact]
    public void Trace02_two_modes_period_finesse_and_no_families()
    {
        var folder = Folder("02_");
        var file = Path.Combine(folder, "scope_ch1.csv");
        var set = Calibrate(FieldTraceSetups.ShortScope(n => Path.Combine(folder, n)), out _);
        var inst = set.Instruments.Single();
        CheckOrderSpacings(set, "sfpi", folder, "scope_ch1.csv", Options(Path.GetFileName(file)), 0.01);
        // source: shared/field-traces/02_short_scope_two_modes/truth.json (finesse 31.5, tolerance ±20 %)
        Assert.True(inst.FinesseMeasured);
        Assert.InRange(inst.Finesse, 31.5 * 0.8, 31.5 * 1.2);
        Assert.Equal(31.5, TruthFinesse(folder), 6);
        // truth: no separate transverse families; the second group is a source line
        Assert.Empty(inst.Families);
        var d = set.Axes.Single().PeriodDecision!;
        Assert.Contains(d.Candidates, c => c.Label == "half" && !c.Consistent);
        Assert.Contains(d.Candidates, c => c.Label == "chosen" && c.Consistent && c.Chosen);
    }

    [Fact]
    public void Trace03_two_peaks_in_1_15_FSR_are_calibrated_not_refused()
    {
        var folder = Folder("03_");
        var file = Path.Combine(folder, "scope_ch1.csv");
        var set = Calibrate(FieldTraceSetups.ShortScope(n => Path.Combine(folder, n)), out _);
        var inst = set.Instruments.Single();
        CheckOrderSpacings(set, "sfpi", folder, "scope_ch1.csv", Options(Path.GetFileName(file)), 0.01);
        // source: shared/field-traces/03_short_scope_single/truth.json (finesse 31.5 ± 20 %)
        Assert.True(inst.FinesseMeasured);
        Assert.InRange(inst.Finesse, TruthFinesse(folder) * 0.8, TruthFinesse(folder) * 1.2);
        Assert.Empty(inst.Families);
    }

    [Fact]
    public void Trace04_four_modes_are_not_taken_for_a_family_ladder()
    {
        var folder = Folder("04_");
        var file = Path.Combine(folder, "open_laser.csv");
        var set = Calibrate(FieldTraceSetups.OpenLaser(n => Path.Combine(folder, n)), out var warnings);
        var inst = set.Instruments.Single();
        CheckOrderSpacings(set, "sfpi", folder, "open_laser.csv", Options(Path.GetFileName(file)), 0.01);
        // truth (shared/field-traces/04_open_laser_four_modes/truth.json): four source lines, no transverse families
        Assert.Empty(inst.Families);
        // source: same truth.json (finesse 26.2 ± 20 %); the overlapping modes leave no isolated peak, so the blend is fitted jointly
        Assert.True(inst.FinesseMeasured);
        Assert.InRange(inst.Finesse, TruthFinesse(folder) * 0.8, TruthFinesse(folder) * 1.2);
        Assert.Contains(warnings, w => w.Contains("fitted jointly to a blend"));
    }

    [Fact]
    public void Trace06_plane_etalon_period_and_finesse()
    {
        var folder = Folder("06_");
        var file = Path.Combine(folder, "stepscan.csv");
        var set = Calibrate(FieldTraceSetups.PlaneEtalon(n => Path.Combine(folder, n)), out _);
        var inst = set.Instruments.Single();
        // source: shared/field-traces/06_plane_low_finesse/truth.json (FSR in DAC codes ± 2 %, finesse 7.8 ± 15 %)
        CheckOrderSpacings(set, "etalon", folder, "stepscan.csv", Options(Path.GetFileName(file)), 0.02);
        Assert.True(inst.FinesseMeasured);
        Assert.InRange(inst.Finesse, TruthFinesse(folder) * 0.85, TruthFinesse(folder) * 1.15);
        Assert.Empty(inst.Families);
    }

    // a confocal cavity's odd family coincides with the next order: no separate family
    [Fact]
    public void Trace07_calibration_sweeps_give_the_period_and_the_cavity_finesse() =>
        CalibrationSweepsOfTwoCavities("07_", FieldTraceSetups.TwoCavities, "cavA", "cavB");

    // planar cavities: no transverse families; the comb's folded modes are source lines
    [Fact]
    public void Trace08_calibration_sweeps_give_the_period_and_the_cavity_finesse() =>
        CalibrationSweepsOfTwoCavities("08_", FieldTraceSetups.DiodeComb, "cav10", "cav7p3");

    /// <summary>Each cavity's calibration sweep against the trace's truth.json: the order spacings of the calibration sweep
    /// (FSR ± 1 %) and the cavity finesse (± 15 %), measured; no transverse family.</summary>
    private void CalibrationSweepsOfTwoCavities(string prefix, Func<Func<string, string>, string> setup, params string[] cavities)
    {
        var folder = Folder(prefix);
        var set = Calibrate(setup(n => Path.Combine(folder, n)), out _);
        foreach (var cav in cavities)
        {
            var options = Options($"{cav}_cal.csv");
            // source: shared/field-traces/<trace>/truth.json, order_spacings of the calibration sweep (FSR ± 1 %)
            CheckOrderSpacings(set with { Axes = set.Axes.Where(a => !a.FromRepeats).ToList() }, cav, folder, $"{cav}_cal.csv", options, 0.01);
            // source: same truth.json, cavity finesse (07: 204 and 216; 08: 147 and 163; ± 15 %), measured on the calibration sweep
            var inst = set.Instruments.Single(i => i.Name == cav);
            Assert.True(inst.FinesseMeasured);
            Assert.InRange(inst.Finesse, TruthFinesse(folder, cav) * 0.85, TruthFinesse(folder, cav) * 1.15);
            Assert.Empty(inst.Families);
        }
    }
}
