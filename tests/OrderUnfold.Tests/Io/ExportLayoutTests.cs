using System.Globalization;
using System.Text;
using OrderUnfold.Io;
using Xunit;

namespace OrderUnfold.Tests.Io;

/// <summary>
/// Scope export layouts met in the field-trace set (shared/field-traces/README.md), rebuilt here from a few lines in the
/// same layout with simulated numbers (made up for the test), plus signal and ramp in two files.
/// </summary>
public sealed class ExportLayoutTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("orderunfold-layout-").FullName;

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); }
        catch (IOException) { }
    }

    private string Write(string name, string content)
    {
        var path = Path.Combine(_dir, name);
        File.WriteAllText(path, content);
        return path;
    }

    private static string F(double v, string format = "R") => v.ToString(format, CultureInfo.InvariantCulture);

    /// <summary>Simulated signal: a bump on a small offset.</summary>
    private static double Signal(int i) => 0.05 + Math.Exp(-Math.Pow((i - 20) / 5.0, 2));

    [Fact]
    public void Tab_separated_decimal_comma_crlf_with_a_rounded_time_column_rebuilt_from_the_interval()
    {
        // layout of 02/03: 4 preamble lines, header, tab, decimal comma, CRLF, time rounded to 3 significant digits
        var sb = new StringBuilder("SIMULATED scope\r\nSample interval:\t4,000E-06 s\r\nRecord length:\t40\r\nCH1:\t0,50 V/div\r\nTime [s]\tCH1 [V]\r\n");
        for (var i = 0; i < 40; i++)
            sb.Append(F(1e-3 + i * 4e-6, "E2").Replace('.', ',')).Append('\t').Append(F(Signal(i), "F4").Replace('.', ',')).Append("\r\n");
        var path = Write("simulated_comma.csv", sb.ToString());

        var raw = SweepReader.Read(new SweepFileOptions { Path = path, YColumn = "2", SampleIntervalS = 4e-6 });
        Assert.Equal(40, raw.Y.Length);
        Assert.Equal(6, raw.Lines[0]);
        Assert.Equal(Math.Round(Signal(3), 4), raw.Y[3], 12);
        Assert.Equal(39 * 4e-6, raw.X[^1], 15);

        // the rounded column repeats a value: refused at that line with the way out
        var e = Assert.Throws<InputException>(() => SweepReader.Read(new SweepFileOptions { Path = path, XColumn = "1" }));
        Assert.Contains("sample_interval", e.Message);
        Assert.Equal(1, e.Column);
    }

    [Fact]
    public void Settings_preamble_and_a_blank_line_before_the_header()
    {
        // layout of 04
        var sb = new StringBuilder("Model,SIMULATED\nSample Interval,2.000000E-06\nRecord Length,40\nVertical Scale,2.0E-01\n\nTIME,CH1\n");
        for (var i = 0; i < 40; i++) sb.Append(F(-1e-3 + i * 2e-6, "E6")).Append(',').Append(F(Signal(i), "F4")).Append('\n');
        var raw = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_preamble.csv", sb.ToString()), XColumn = "TIME", YColumn = "CH1" });
        Assert.Equal(40, raw.Y.Length);
        Assert.Equal(7, raw.Lines[0]);
        Assert.Equal(-1e-3, raw.X[0]);
    }

    [Fact]
    public void Leading_nan_rows_are_skipped()
    {
        // layout of 01: header, then rows with NaN in the signal and ramp columns
        var sb = new StringBuilder("time,pd,ramp\n");
        for (var i = 0; i < 5; i++) sb.Append(F(i * 2e-9)).Append(",NaN,NaN\n");
        for (var i = 5; i < 45; i++) sb.Append(F(i * 2e-9)).Append(',').Append(F(Signal(i))).Append(',').Append(F(0.1 * i)).Append('\n');
        var raw = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_nan.csv", sb.ToString()), XColumn = "ramp", YColumn = "pd", Scan = ScanCoordinate.Ramp });
        Assert.Equal(40, raw.Y.Length);
        Assert.Equal(7, raw.Lines[0]);
        Assert.Equal(0.5, raw.X[0], 12);
    }

    [Fact]
    public void Comment_line_then_header_then_dac_codes()
    {
        // layout of 06
        var sb = new StringBuilder("# SIMULATED stepped scan\ndac_code,detector_V\n");
        for (var i = 0; i < 40; i++) sb.Append(300 + 12 * i).Append(',').Append(F(Signal(i), "F5")).Append('\n');
        var raw = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_dac.csv", sb.ToString()), XColumn = "dac_code", YColumn = "detector_V", Scan = ScanCoordinate.Ramp });
        Assert.Equal(40, raw.Y.Length);
        Assert.Equal(3, raw.Lines[0]);
        Assert.Equal(312, raw.X[1]);
    }

    [Fact]
    public void Semicolon_file_with_an_8_bit_ramp_that_steps_back()
    {
        // layout of 07: semicolon, point decimal, header with units; the ramp is quantised and noisy
        var sb = new StringBuilder("Time [s];CH1 [V];CH2 [V]\n");
        var rng = new Random(3);
        for (var i = 0; i < 200; i++)
        {
            var ramp = Math.Round((0.3 + 0.045 * i + 0.05 * (rng.NextDouble() - 0.5)) / 0.046875) * 0.046875;
            sb.Append(F(i * 1e-6, "E6")).Append(';').Append(F(Signal(i % 40), "F5")).Append(';').Append(F(ramp, "F4")).Append('\n');
        }

        var raw = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_semicolon.csv", sb.ToString()), XColumn = "3", YColumn = "2", Scan = ScanCoordinate.Ramp });
        Assert.Equal(200, raw.Y.Length);
        var sweep = Assert.Single(SweepReader.Split(raw));
        Assert.True(RampSegments.IsStrictlyMonotone(sweep.X, 1));
    }

    [Fact]
    public void Two_header_lines_names_then_units()
    {
        // layout of 08: the header found is the units line right above the numbers
        var sb = new StringBuilder("x-axis,1\nsecond,Volt\n");
        for (var i = 0; i < 40; i++) sb.Append(F(-1e-2 + i * 5e-7, "E6")).Append(',').Append(F(Signal(i), "F5")).Append('\n');
        var path = Write("simulated_two_headers.csv", sb.ToString());
        var raw = SweepReader.Read(new SweepFileOptions { Path = path });
        Assert.Equal(40, raw.Y.Length);
        Assert.Equal(3, raw.Lines[0]);
        Assert.Equal(Math.Round(Signal(39), 5), raw.Y[^1], 12);
        Assert.Equal(40, SweepReader.Read(new SweepFileOptions { Path = path, XColumn = "second", YColumn = "Volt" }).Y.Length);
        var byName = SweepReader.Read(new SweepFileOptions { Path = path, XColumn = "x-axis", YColumn = "Volt" }); // names from the upper line
        Assert.Equal(raw.X, byName.X);
        var e = Assert.Throws<InputException>(() => SweepReader.Read(new SweepFileOptions { Path = path, YColumn = "CH1" }));
        Assert.Contains("\"x-axis\"", e.Message);
    }

    // ----- one channel per file -----------------------------------------------------------------------------

    /// <summary>Segmented-export layout of 05 (5 header lines, "Time,Ampl", CRLF) with simulated values at times t0 + i·dt.</summary>
    private string SegmentFile(string name, string channel, int count, double t0, double dt, Func<int, double> value)
    {
        var sb = new StringBuilder($"SIMULATED digital scope export,{channel}\r\nSegments,1,SegmentSize,{count}\r\nSegment,TrigTime,TimeSinceSegment1\r\n#1,01-Jan-2000 00:00:00,0\r\nTime,Ampl\r\n");
        for (var i = 0; i < count; i++) sb.Append(F(t0 + i * dt, "E6")).Append(',').Append(F(value(i), "E5")).Append("\r\n");
        return Write(name, sb.ToString());
    }

    /// <summary>Simulated triangle: up over 100 samples, down over 100, up again.</summary>
    private static double Triangle(double k) => k % 200 < 100 ? 0.25 + 0.045 * (k % 200) : 0.25 + 0.045 * (200 - k % 200);

    private SweepFileOptions TwoFiles(string signal, string ramp) => new()
    {
        Path = signal, XColumn = "Time", YColumn = "Ampl", RampFile = ramp, RampTimeColumn = "Time", RampValueColumn = "Ampl",
    };

    [Fact]
    public void Ramp_file_with_identical_time_stamps_gives_the_recorded_ramp_and_splits_the_triangle()
    {
        var signal = SegmentFile("simulated_ch1.csv", "CH1", 300, -1e-2, 2e-6, i => Signal(i % 50));
        var ramp = SegmentFile("simulated_ch2.csv", "CH2", 300, -1e-2, 2e-6, i => Triangle(i));

        var raw = SweepReader.Read(TwoFiles(signal, ramp));
        Assert.Equal(300, raw.Y.Length);
        for (var i = 0; i < 300; i++) Assert.Equal(double.Parse(F(Triangle(i), "E5"), CultureInfo.InvariantCulture), raw.Ramp![i]);
        Assert.Equal(ScanCoordinate.Time, raw.Scan);
        Assert.Equal(-1e-2, raw.X[0]);
        Assert.Equal(ramp, raw.RampSource);

        var sweeps = SweepReader.Split(raw);
        Assert.Equal([RampDirection.Up, RampDirection.Down, RampDirection.Up], sweeps.Select(s => s.Direction));

        var byRamp = SweepReader.Read(TwoFiles(signal, ramp) with { Scan = ScanCoordinate.Ramp });
        Assert.Equal(byRamp.Ramp, byRamp.X);
    }

    [Fact]
    public void Ramp_on_another_time_base_is_interpolated_onto_the_signal_times()
    {
        // ramp sampled every 5 us from slightly before the signal, which is sampled every 2 us
        var signal = SegmentFile("simulated_fast.csv", "CH1", 200, 0, 2e-6, i => Signal(i % 40));
        var ramp = SegmentFile("simulated_slow.csv", "CH2", 90, -5e-6, 5e-6, i => 1 + 1000 * (-5e-6 + i * 5e-6));
        var raw = SweepReader.Read(TwoFiles(signal, ramp));
        for (var i = 0; i < 200; i++) Assert.Equal(1 + 1000 * (i * 2e-6), raw.Ramp![i], 5); // linear ramp: interpolation is exact up to printing
    }

    [Fact]
    public void Ramp_file_that_does_not_cover_the_signal_is_refused_at_the_first_line_outside()
    {
        var signal = SegmentFile("simulated_long.csv", "CH1", 100, 0, 2e-6, i => Signal(i % 40));
        var shortRamp = SegmentFile("simulated_short.csv", "CH2", 60, 0, 2e-6, i => 0.01 * i);
        var e = Assert.Throws<InputException>(() => SweepReader.Read(TwoFiles(signal, shortRamp)));
        Assert.Equal(signal, e.File);
        Assert.Equal(6 + 60, e.Line); // sample 60 (0-based) is on line 66
        Assert.Equal(1, e.Column);
        Assert.Contains("outside the time range", e.Message);

        var elsewhere = SegmentFile("simulated_later.csv", "CH2", 100, 1.0, 2e-6, i => 0.01 * i);
        var e2 = Assert.Throws<InputException>(() => SweepReader.Read(TwoFiles(signal, elsewhere)));
        Assert.Contains("do not overlap", e2.Message);
        Assert.Equal(6, e2.Line);
    }

    [Fact]
    public void Ramp_file_whose_time_goes_back_is_refused_with_its_line_and_column()
    {
        var signal = SegmentFile("simulated_sig.csv", "CH1", 60, 0, 2e-6, i => Signal(i % 40));
        var ramp = SegmentFile("simulated_back.csv", "CH2", 60, 0, 2e-6, i => 0.01 * i);
        var lines = File.ReadAllLines(ramp);
        lines[21] = "1.000000E-06,2.00000E-01"; // sample 16 (line 22) goes back from 30 us to 1 us
        File.WriteAllText(ramp, string.Join("\r\n", lines) + "\r\n");
        var e = Assert.Throws<InputException>(() => SweepReader.Read(TwoFiles(signal, ramp)));
        Assert.Equal(ramp, e.File);
        Assert.Contains("ramp file's time must increase", e.Message);
        Assert.Contains("not strictly increasing at line 22", e.Message);
        Assert.Equal(22, e.Line);
        Assert.Equal(1, e.Column);
    }

    [Fact]
    public void Ramp_file_and_ramp_column_together_are_refused()
    {
        var signal = SegmentFile("simulated_a.csv", "CH1", 60, 0, 2e-6, i => Signal(i % 40));
        var e = Assert.Throws<InputException>(() => SweepReader.Read(TwoFiles(signal, signal) with { RampColumn = "2" }));
        Assert.Contains("ramp_file", e.Message);
    }
}
