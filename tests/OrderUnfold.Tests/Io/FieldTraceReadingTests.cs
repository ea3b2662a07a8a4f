using OrderUnfold.Tests.FieldTraces;
using System.Text.Json;
using OrderUnfold.Io;
using Xunit;

namespace OrderUnfold.Tests.Io;

/// <summary>Finds the field-trace set (traces simulated outside this project) at &lt;repo root&gt;/../shared/field-traces.</summary>
internal static class FieldTraceFolder
{
    /// <summary>The folder; the repository root is the first folder above the test assembly that holds OrderUnfold.sln.</summary>
    public static string Path => FieldTraceSet.Root;

    public static string File(string trace, string name) => System.IO.Path.Combine(Path, trace, name);

    public static JsonElement Truth(string trace) =>
        JsonDocument.Parse(System.IO.File.ReadAllText(File(trace, "truth.json"))).RootElement;
}

/// <summary>
/// Every file of the field-trace set (shared/field-traces, SIMULATED outside this project; README.md there says the
/// formats) read with the options a user would write from that README. The expected row counts, quantisation steps
/// (scope range / 2^bits) and clipped-sample counts come from each trace's truth.json.
/// </summary>
public sealed class FieldTraceReadingTests
{
    /// <summary>The step of the digitiser as truth.json states it: range / 2^bits of "scope" (or "adc") of the file.</summary>
    private static double TrueStep(JsonElement truth, string file)
    {
        var entry = truth.GetProperty("files").EnumerateArray().First(f => f.GetProperty("name").GetString() == file);
        var digitiser = entry.TryGetProperty("scope", out var scope) ? scope : entry.GetProperty("adc");
        var range = digitiser.TryGetProperty("range_V", out var r) ? r : digitiser.GetProperty("pd_range_V");
        return (range[1].GetDouble() - range[0].GetDouble()) / Math.Pow(2, digitiser.GetProperty("bits").GetInt32());
    }

    /// <summary>detector.samples_clipped_at_full_scale of the file in truth.json, or null where truth.json has none.</summary>
    private static int? TrueClipped(JsonElement element, string file)
    {
        switch (element.ValueKind)
        {
            case JsonValueKind.Object:
                if (element.TryGetProperty("file", out var f) && f.ValueKind == JsonValueKind.String && f.GetString() == file &&
                    element.TryGetProperty("detector", out var d) && d.TryGetProperty("samples_clipped_at_full_scale", out var c))
                    return c.GetInt32();
                foreach (var p in element.EnumerateObject())
                    if (TrueClipped(p.Value, file) is int n) return n;
                return null;
            case JsonValueKind.Array:
                foreach (var e in element.EnumerateArray())
                    if (TrueClipped(e, file) is int n) return n;
                return null;
            default:
                return null;
        }
    }

    private static void CheckDigitiser(string trace, string file, IReadOnlyList<Sweep> sweeps)
    {
        var truth = FieldTraceFolder.Truth(trace);
        var step = TrueStep(truth, file);
        Assert.All(sweeps, s => Assert.InRange(s.QuantisationStep!.Value, step * 0.995, step * 1.005));
        // The README names clipping only in 07 (cavB calibration); truth.json counts it per file where it counts it.
        var clipped = TrueClipped(truth, file) ?? 0;
        Assert.Equal(clipped, sweeps.Sum(s => s.ClippedSamples.Length));
    }

    [Fact]
    public void Trace01_leading_nan_rows_are_skipped_and_the_triangle_splits()
    {
        const string trace = "01_ringdown_confocal", name = "ringdown_780nm.csv";
        var options = new SweepFileOptions { Path = FieldTraceFolder.File(trace, name), XColumn = "ramp", YColumn = "pd", Scan = ScanCoordinate.Ramp };
        var raw = SweepReader.Read(options);
        Assert.Equal(62500 - 173, raw.Y.Length); // truth.json: rows 62500, leading_NaN_rows 173
        Assert.Equal(2 + 173, raw.Lines[0]);
        var sweeps = SweepReader.Split(raw);
        Assert.Contains(sweeps, s => s.Direction == RampDirection.Up);
        Assert.Contains(sweeps, s => s.Direction == RampDirection.Down);
        CheckDigitiser(trace, name, sweeps);
    }

    [Theory]
    [InlineData("02_short_scope_two_modes")]
    [InlineData("03_short_scope_single")]
    public void Trace02_03_decimal_comma_tab_crlf_with_time_rebuilt_from_the_stated_interval(string trace)
    {
        const string name = "scope_ch1.csv";
        var options = new SweepFileOptions { Path = FieldTraceFolder.File(trace, name), YColumn = "2", SampleIntervalS = 4e-6 };
        var raw = SweepReader.Read(options);
        Assert.Equal(600, raw.Y.Length);
        Assert.Equal(6, raw.Lines[0]); // 4 preamble lines and the header
        Assert.Equal(599 * 4e-6, raw.X[^1], 12);
        var first = File.ReadLines(options.Path).ElementAt(5).Split('\t')[1];
        Assert.Equal(double.Parse(first.Replace(',', '.'), System.Globalization.CultureInfo.InvariantCulture), raw.Y[0]);
        CheckDigitiser(trace, name, SweepReader.Split(raw));

        // The rounded time column itself repeats: naming it is refused with the way out.
        var e = Assert.Throws<InputException>(() => SweepReader.Read(options with { XColumn = "1", SampleIntervalS = null }));
        Assert.Contains("sample_interval", e.Message);
        Assert.NotNull(e.Line);
    }

    [Fact]
    public void Trace04_settings_preamble_and_blank_line_before_the_header()
    {
        const string trace = "04_open_laser_four_modes", name = "open_laser.csv";
        var raw = SweepReader.Read(new SweepFileOptions { Path = FieldTraceFolder.File(trace, name), XColumn = "TIME", YColumn = "CH1" });
        Assert.Equal(1000, raw.Y.Length);
        Assert.Equal(17, raw.Lines[0]); // 14 settings lines, a blank line, the header
        Assert.Equal(-1e-3, raw.X[0]);
        Assert.Equal(2e-6, raw.X[1] - raw.X[0], 12);
        CheckDigitiser(trace, name, SweepReader.Split(raw));
    }

    [Fact]
    public void Trace05_signal_and_ramp_in_two_files_match_by_time_and_the_triangle_splits()
    {
        const string trace = "05_tall_half_family", name = "ch1_pd.csv";
        var options = new SweepFileOptions
        {
            Path = FieldTraceFolder.File(trace, name), XColumn = "Time", YColumn = "Ampl",
            RampFile = FieldTraceFolder.File(trace, "ch2_ramp.csv"), RampTimeColumn = "Time", RampValueColumn = "Ampl",
            Scan = ScanCoordinate.Ramp,
        };
        var raw = SweepReader.Read(options);
        Assert.Equal(10000, raw.Y.Length);
        Assert.Equal(6, raw.Lines[0]);
        Assert.Equal(options.RampFile, raw.RampSource);
        // identical time stamps: the ramp is the ramp file's values unchanged (its 6th line: the first sample)
        var rampText = File.ReadLines(options.RampFile).ElementAt(5).Split(',')[1];
        Assert.Equal(double.Parse(rampText, System.Globalization.CultureInfo.InvariantCulture), raw.Ramp![0]);

        var sweeps = SweepReader.Split(raw);
        Assert.Equal([RampDirection.Up, RampDirection.Down, RampDirection.Up], sweeps.Select(s => s.Direction));
        // truth.json true.axis.segments: the first up half ends at t = -0.00208 s, i.e. sample (0.01 - 0.00208) / 2 us = 3960
        Assert.InRange(sweeps[1].FirstSample, 3960 - 100, 3960 + 100);
        Assert.InRange(sweeps[2].FirstSample, 8460 - 100, 8460 + 100);
        CheckDigitiser(trace, name, sweeps);
    }

    [Fact]
    public void Trace05_setup_with_ramp_file_reads_as_a_user_would_write_it()
    {
        // the setup a user writes from the field-trace README (two concave mirrors R = 50 mm spaced 55 mm, finesse ~150)
        var folder = Path.Combine(FieldTraceFolder.Path, "05_tall_half_family");
        var toml = $$"""
            [[instrument]]
            name = "cav55"
            length = "55 mm"
            finesse = 150
            [[sweep]]
            instrument = "cav55"
            file = "{{Path.Combine(folder, "ch1_pd.csv")}}"
            x_column = "Time"
            y_column = "Ampl"
            ramp_file = "{{Path.Combine(folder, "ch2_ramp.csv")}}"
            ramp_time_column = "Time"
            ramp_value_column = "Ampl"
            scan = "ramp"
            """;
        using var outside = InputLimits.Use(new InputLimits { AllowOutsidePaths = true }); // the raw files stay in shared/field-traces
        var setup = SetupReader.ReadText(toml, Path.Combine(Path.GetTempPath(), "t05-setup.toml"));
        var sweeps = SweepReader.ReadSweeps(Assert.Single(setup.Sweeps).File);
        Assert.Equal([RampDirection.Up, RampDirection.Down, RampDirection.Up], sweeps.Select(s => s.Direction));
        Assert.All(sweeps, s => Assert.Equal(ScanCoordinate.Ramp, s.Scan));
        // ramp_min_V 0.25 to ramp_max_V 4.75 (truth.json true.axis; the recorded ramp has noise and 8-bit steps)
        Assert.InRange(sweeps[1].X.Max(), 4.6, 4.9);
        Assert.InRange(sweeps[1].X.Min(), 0.1, 0.4);
    }

    [Fact]
    public void Trace06_comment_line_then_dac_codes()
    {
        const string trace = "06_plane_low_finesse", name = "stepscan.csv";
        var raw = SweepReader.Read(new SweepFileOptions
        {
            Path = FieldTraceFolder.File(trace, name), XColumn = "dac_code", YColumn = "detector_V", Scan = ScanCoordinate.Ramp,
        });
        Assert.Equal(300, raw.Y.Length);
        Assert.Equal(3, raw.Lines[0]);
        Assert.Equal(300, raw.X[0]);
        Assert.Equal(3888, raw.X[^1]); // truth.json: dac_code 300..3888 step 12
        var sweep = Assert.Single(SweepReader.Split(raw));
        CheckDigitiser(trace, name, [sweep]);
    }

    [Theory]
    [InlineData("cavA_cal.csv")]
    [InlineData("cavA_meas.csv")]
    [InlineData("cavB_cal.csv")]
    [InlineData("cavB_meas.csv")]
    public void Trace07_semicolon_files_with_a_noisy_8_bit_ramp(string name)
    {
        const string trace = "07_two_cavity_multiline";
        var raw = SweepReader.Read(new SweepFileOptions { Path = FieldTraceFolder.File(trace, name), XColumn = "3", YColumn = "2", Scan = ScanCoordinate.Ramp });
        Assert.Equal(20000, raw.Y.Length);
        var sweep = Assert.Single(SweepReader.Split(raw)); // a rising sawtooth: one up sweep
        Assert.Equal(RampDirection.Up, sweep.Direction);
        Assert.True(RampSegments.IsStrictlyMonotone(sweep.X, 1));
        CheckDigitiser(trace, name, [sweep]);
    }

    [Theory]
    [InlineData("cav10_cal.csv")]
    [InlineData("cav10_meas.csv")]
    [InlineData("cav7p3_cal.csv")]
    [InlineData("cav7p3_meas.csv")]
    public void Trace08_two_header_lines_names_and_units(string name)
    {
        const string trace = "08_diode_comb_two_cavity";
        var raw = SweepReader.Read(new SweepFileOptions { Path = FieldTraceFolder.File(trace, name) });
        Assert.Equal(40000, raw.Y.Length);
        Assert.Equal(3, raw.Lines[0]);
        Assert.Equal(-1e-2, raw.X[0]);
        Assert.Equal(5e-7, raw.X[1] - raw.X[0], 12);
        CheckDigitiser(trace, name, SweepReader.Split(raw));
        // columns named from either header line: "x-axis" (names) and "Volt" (units)
        var named = SweepReader.Read(new SweepFileOptions { Path = FieldTraceFolder.File(trace, name), XColumn = "x-axis", YColumn = "Volt" });
        Assert.Equal(raw.Y, named.Y);
    }
}
