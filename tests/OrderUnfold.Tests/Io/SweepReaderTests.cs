using System.Globalization;
using System.Text;
using OrderUnfold.Io;
using Xunit;

namespace OrderUnfold.Tests.Io;

/// <summary>
/// Reading delimited sweep exports and splitting ramps. Every fixture file is written by the test itself into a
/// fresh temporary folder; all numbers in them are simulated (made up for the test), not measured.
/// </summary>
public sealed class SweepReaderTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("orderunfold-io-").FullName;

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

    private static string F(double v) => v.ToString("R", CultureInfo.InvariantCulture);

    /// <summary>Simulated signal: a smooth bump, so every sample differs.</summary>
    private static double Signal(int i) => 0.1 + Math.Exp(-Math.Pow((i - 20) / 6.0, 2));

    /// <summary>Simulated two-column rows "t{d}y", t = i µs.</summary>
    private static string TimeRows(int count, string delimiter = ",", int offset = 0)
    {
        var sb = new StringBuilder();
        for (int i = 0; i < count; i++) sb.Append(F((i + offset) * 1e-6)).Append(delimiter).Append(F(Signal(i + offset))).Append('\n');
        return sb.ToString();
    }

    private static InputException Fails(SweepFileOptions o) => Assert.Throws<InputException>(() => SweepReader.Read(o));

    // ----- layouts ------------------------------------------------------------------------------------------

    [Fact]
    public void Reads_comma_file_with_header_and_names_columns_case_insensitively()
    {
        var path = Write("simulated_header.csv", "Time (s), CH1 \n" + TimeRows(30));
        var t = SweepReader.Read(new SweepFileOptions { Path = path, XColumn = "time (s)", YColumn = "ch1" });

        Assert.Equal(30, t.X.Length);
        Assert.Equal(0.0, t.X[0]);
        Assert.Equal(29e-6, t.X[29], 15);
        Assert.Equal(Signal(7), t.Y[7], 15);
        Assert.Equal(2, t.Lines[0]);
        Assert.Equal(31, t.Lines[29]);
        Assert.Null(t.Ramp);
        Assert.Equal(path, t.Source);
        Assert.Equal(ScanCoordinate.Time, t.Scan);
    }

    [Fact]
    public void Reads_file_without_header_first_column_x_last_column_y()
    {
        var sb = new StringBuilder();
        for (int i = 0; i < 20; i++) sb.Append($"{F(i * 1e-3)},{F(-i)},{F(Signal(i))}\n");
        var t = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_noheader.csv", sb.ToString()) });

        Assert.Equal(20, t.X.Length);
        Assert.Equal(5e-3, t.X[5], 15);
        Assert.Equal(Signal(5), t.Y[5], 15);
        Assert.Equal(1, t.Lines[0]);
    }

    [Fact]
    public void Detects_semicolon_delimiter_with_decimal_comma()
    {
        var sb = new StringBuilder("Zeit;Kanal A\n");
        for (int i = 0; i < 20; i++) sb.Append($"{i},{i % 10:D3};{i / 4},{(i % 4) * 25}\n"); // "3,003;0,75"
        var t = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_semicolon.csv", sb.ToString()), YColumn = "kanal a" });

        Assert.Equal(3.003, t.X[3], 12);
        Assert.Equal(0.75, t.Y[3], 12);
        Assert.Equal(20, t.Y.Length);
    }

    [Fact]
    public void Detects_tab_delimiter_and_picks_columns_by_index()
    {
        var sb = new StringBuilder("t\tch1\tch2\n");
        for (int i = 0; i < 20; i++) sb.Append($"{F(i * 2e-9)}\t{F(Signal(i))}\t{F(-Signal(i))}\n");
        var path = Write("simulated_tab.txt", sb.ToString());
        var byIndex = SweepReader.Read(new SweepFileOptions { Path = path, XColumn = "1", YColumn = "2" });
        var byName = SweepReader.Read(new SweepFileOptions { Path = path, XColumn = "T", YColumn = "CH1" });

        Assert.Equal(Signal(4), byIndex.Y[4], 15);
        Assert.Equal(byName.Y, byIndex.Y);
        Assert.Equal(byName.X, byIndex.X);
        var last = SweepReader.Read(new SweepFileOptions { Path = path });
        Assert.Equal(-Signal(4), last.Y[4], 15);
    }

    [Fact]
    public void Tab_delimited_decimal_comma_is_detected()
    {
        var sb = new StringBuilder();
        for (int i = 0; i < 20; i++) sb.Append($"{i},5\t-{i},25\n");
        var t = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_tab_comma.txt", sb.ToString()) });
        Assert.Equal(2.5, t.X[2], 12);
        Assert.Equal(-2.25, t.Y[2], 12);
    }

    [Fact]
    public void Explicit_header_delimiter_and_decimal_mark_override_detection()
    {
        // A header made of numbers (channel numbers) looks like data unless the header option says otherwise.
        var path = Write("simulated_numeric_header.csv", "1;2\n" + TimeRows(20, ";").Replace('.', ','));
        Assert.Contains("not strictly increasing", Fails(new SweepFileOptions { Path = path }).Message);

        var t = SweepReader.Read(new SweepFileOptions { Path = path, HasHeader = true, Delimiter = ';', DecimalComma = true });
        Assert.Equal(20, t.X.Length);
        Assert.Equal(2, t.Lines[0]);
        Assert.Equal(Signal(3), t.Y[3], 12);
    }

    [Fact]
    public void Bad_options_are_reported()
    {
        var path = Write("simulated_opts.csv", TimeRows(20));
        Assert.Contains("sample interval must be a positive time", Fails(new SweepFileOptions { Path = path, SampleIntervalS = 0 }).Message);
        Assert.Contains("delimiter must be", Fails(new SweepFileOptions { Path = path, Delimiter = ':' }).Message);
        Assert.Contains("index must be 1 or more", Fails(new SweepFileOptions { Path = path, YColumn = "0" }).Message);
        Assert.Contains("same column", Fails(new SweepFileOptions { Path = path, XColumn = "2" }).Message);
    }

    [Fact]
    public void Skips_settings_preamble_and_finds_header_above_the_data()
    {
        var content = "Model,XYZ\nSample Interval,1e-6\nRecord Length,25\nVertical Units,V\n\nTime,CH1\n" + TimeRows(25);
        var t = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_preamble.csv", content), YColumn = "CH1" });

        Assert.Equal(25, t.X.Length);
        Assert.Equal(7, t.Lines[0]);
        Assert.Equal(Signal(0), t.Y[0], 15);
    }

    [Fact]
    public void Rebuilds_time_axis_from_sample_interval_for_a_one_column_export()
    {
        var sb = new StringBuilder("Model,XYZ\nSample Interval,2e-9\nRecord Length,18\nCH1\n");
        for (int i = 0; i < 18; i++) sb.Append($"{F(Signal(i))}\n");
        var t = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_onecol.csv", sb.ToString()), SampleIntervalS = 2e-9 });

        Assert.Equal(18, t.X.Length);
        Assert.Equal(0.0, t.X[0]);
        Assert.Equal(17 * 2e-9, t.X[17], 1e-22);
        Assert.Equal(Signal(17), t.Y[17], 15);
        Assert.Equal(5, t.Lines[0]);
    }

    [Fact]
    public void Rebuilt_time_axis_ignores_a_time_column_when_no_x_column_is_named()
    {
        var t = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_two.csv", TimeRows(20)), SampleIntervalS = 1e-3 });
        Assert.Equal(5e-3, t.X[5], 15);
        Assert.Equal(Signal(5), t.Y[5], 15);
    }

    [Fact]
    public void One_column_without_interval_asks_for_it()
    {
        var sb = new StringBuilder();
        for (int i = 0; i < 20; i++) sb.Append($"{F(Signal(i))}\n");
        var e = Fails(new SweepFileOptions { Path = Write("simulated_onecol.csv", sb.ToString()) });
        Assert.Contains("one column only: give sample_interval to rebuild the time axis", e.Message);
    }

    [Fact]
    public void Parses_exponent_and_signed_numbers()
    {
        var sb = new StringBuilder("x,y\n");
        for (int i = 0; i < 20; i++) sb.Append($"{i}.5E-03,-0.0040\n");
        sb.Replace("-0.0040\n", "+1.25e+2\n", sb.Length - 9, 9);
        var t = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_exp.csv", sb.ToString()) });
        Assert.Equal(1.5e-3, t.X[1], 15);
        Assert.Equal(-0.004, t.Y[0], 15);
        Assert.Equal(125, t.Y[19], 12);
    }

    [Fact]
    public void Skips_leading_nan_inf_and_blank_rows_and_keeps_line_numbers()
    {
        // Lines 3-6 are part of the number block (NaN, inf, blank) but come before the first finite row.
        var content = "Time,CH1\n\nNaN,NaN\nnan,-inf\n,\n-1e-6,NaN\n" + TimeRows(20) + "\n\n";
        var t = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_leading_nan.csv", content) });

        Assert.Equal(20, t.X.Length);
        Assert.Equal(7, t.Lines[0]);
        Assert.Equal(26, t.Lines[19]);
        Assert.Equal(0.0, t.X[0]);
    }

    // ----- bad input ----------------------------------------------------------------------------------------

    [Fact]
    public void Missing_file_is_reported_with_its_path()
    {
        var path = Path.Combine(_dir, "absent.csv");
        var e = Fails(new SweepFileOptions { Path = path });
        Assert.Contains("file not found", e.Message);
        Assert.Contains(path, e.Message);
        Assert.Equal(path, e.File);
    }

    [Theory]
    [InlineData("")]
    [InlineData("\n  \n\t\n")]
    public void Empty_file_is_an_error(string content)
    {
        var path = Write("empty.csv", content);
        var e = Fails(new SweepFileOptions { Path = path });
        Assert.Contains("empty", e.Message);
        Assert.Equal(path, e.File);
    }

    [Fact]
    public void Header_only_is_an_error()
    {
        var path = Write("header_only.csv", "\nTime,CH1\n\n");
        var e = Fails(new SweepFileOptions { Path = path });
        Assert.Contains("only a header line", e.Message);
        Assert.Equal(2, e.Line);
        Assert.Equal(path, e.File);
    }

    [Fact]
    public void Text_without_numbers_is_an_error()
    {
        var e = Fails(new SweepFileOptions { Path = Write("words.csv", "a,b\nc,d\ne,f\n") });
        Assert.Contains("no rows of numbers", e.Message);
    }

    [Fact]
    public void Non_numeric_cell_gives_line_and_column()
    {
        var sb = new StringBuilder("Time,Ref,CH1\n");
        for (int i = 0; i < 30; i++) sb.Append($"{F(i * 1e-6)},0,{(i == 12 ? "abc" : F(Signal(i)))}\n");
        var path = Write("simulated_bad_cell.csv", sb.ToString());
        var e = Fails(new SweepFileOptions { Path = path });

        Assert.Equal("expected a number in column 3 (\"CH1\") but got \"abc\"", e.Message);
        Assert.Equal(14, e.Line);
        Assert.Equal(3, e.Column);
        Assert.Equal(path, e.File);
    }

    [Fact]
    public void Bad_cell_near_the_start_of_the_data_is_not_taken_for_a_preamble()
    {
        // The longest run of numbers starts after the bad row; the rows before it are still data.
        var sb = new StringBuilder("Time,CH1\n");
        for (int i = 0; i < 40; i++) sb.Append($"{F(i * 1e-6)},{(i == 5 ? "--" : F(Signal(i)))}\n");
        var e = Fails(new SweepFileOptions { Path = Write("simulated_early_bad.csv", sb.ToString()) });
        Assert.Equal(7, e.Line);
        Assert.Equal(2, e.Column);
    }

    [Fact]
    public void Nan_in_the_middle_is_an_error()
    {
        var sb = new StringBuilder("Time,CH1\n");
        for (int i = 0; i < 30; i++) sb.Append($"{F(i * 1e-6)},{(i == 20 ? "NaN" : F(Signal(i)))}\n");
        var e = Fails(new SweepFileOptions { Path = Write("simulated_mid_nan.csv", sb.ToString()) });

        Assert.StartsWith("expected a number in column 2 (\"CH1\") but got \"NaN\"", e.Message);
        Assert.Equal(22, e.Line);
        Assert.Equal(2, e.Column);
    }

    [Fact]
    public void Blank_line_inside_the_data_is_an_error_but_trailing_blanks_are_fine()
    {
        var e = Fails(new SweepFileOptions { Path = Write("simulated_gap.csv", TimeRows(10) + "\n" + TimeRows(10, offset: 10)) });
        Assert.Equal(11, e.Line);

        var t = SweepReader.Read(new SweepFileOptions { Path = Write("simulated_trailing.csv", TimeRows(20) + "\n\n \n") });
        Assert.Equal(20, t.X.Length);
    }

    [Fact]
    public void Fewer_than_16_samples_is_an_error()
    {
        var e = Fails(new SweepFileOptions { Path = Write("simulated_short.csv", "t,y\n" + TimeRows(9)) });
        Assert.Contains("at least 16 samples but got 9", e.Message);
    }

    [Fact]
    public void Unknown_column_name_lists_the_header()
    {
        var path = Write("simulated_cols.csv", "Time,CH1,CH2\n" + string.Concat(Enumerable.Range(0, 20).Select(i => $"{i},{i},{-i}\n")));
        var e = Fails(new SweepFileOptions { Path = path, YColumn = "CH3" });
        Assert.Contains("\"CH3\"", e.Message);
        Assert.Contains("\"Time\", \"CH1\", \"CH2\"", e.Message);
        Assert.Equal(path, e.File);
        Assert.Equal(1, e.Line);
    }

    [Fact]
    public void Column_index_out_of_range_gives_the_field_count()
    {
        var e = Fails(new SweepFileOptions { Path = Write("simulated_idx.csv", TimeRows(20)), YColumn = "5" });
        Assert.Contains("column 5 is out of range", e.Message);
        Assert.Contains("2 fields", e.Message);
    }

    [Fact]
    public void Column_name_without_header_asks_for_an_index()
    {
        var e = Fails(new SweepFileOptions { Path = Write("simulated_nohdr.csv", TimeRows(20)), YColumn = "CH1" });
        Assert.Contains("no header row", e.Message);
    }

    [Fact]
    public void Constant_x_is_an_error()
    {
        var rows = string.Concat(Enumerable.Range(0, 20).Select(i => $"0.5,{F(Signal(i))}\n"));
        var e = Fails(new SweepFileOptions { Path = Write("simulated_const_x.csv", "Ramp,CH1\n" + rows), Scan = ScanCoordinate.Ramp });
        Assert.Contains("the scan coordinate in column 1 (\"Ramp\") is constant", e.Message);
        Assert.Equal(1, e.Column);
    }

    [Fact]
    public void Time_that_goes_back_is_reported_at_its_line()
    {
        var sb = new StringBuilder("Time,CH1\n");
        for (int i = 0; i < 20; i++) sb.Append($"{F((i == 10 ? 8 : i) * 1e-6)},{F(Signal(i))}\n");
        var e = Fails(new SweepFileOptions { Path = Write("simulated_time_back.csv", sb.ToString()) });
        Assert.Contains("not strictly increasing at line 12", e.Message);
        Assert.Equal(12, e.Line);
        Assert.Equal(1, e.Column);
    }

    // ----- splitting ----------------------------------------------------------------------------------------

    /// <summary>
    /// Simulated triangle ramp, 0 → 5 V → 0 → 5 V, 300 samples per leg, recorded by an 8-bit ADC over 0–5 V with
    /// Gaussian noise of 50 mV (fixed seed), so the recorded ramp steps and jitters back and forth.
    /// </summary>
    private static (double[] Ramp, double[] Ideal) TriangleRamp(int legs = 3, int perLeg = 300, double noise = 0.05, int seed = 7)
    {
        var rng = new Random(seed);
        int n = legs * perLeg;
        var ideal = new double[n];
        var recorded = new double[n];
        for (int i = 0; i < n; i++)
        {
            int leg = i / perLeg;
            double f = (i % perLeg + 0.5) / perLeg;
            ideal[i] = 5.0 * (leg % 2 == 0 ? f : 1 - f);
            double g = Math.Sqrt(-2 * Math.Log(1 - rng.NextDouble())) * Math.Cos(2 * Math.PI * rng.NextDouble());
            recorded[i] = Math.Round((ideal[i] + noise * g) / (5.0 / 255)) * (5.0 / 255);
        }
        return (recorded, ideal);
    }

    private string WriteRampFile(double[] ramp, string name)
    {
        var sb = new StringBuilder("Time,Ramp,CH1\n");
        for (int i = 0; i < ramp.Length; i++) sb.Append($"{F(i * 1e-6)},{F(ramp[i])},{F(Signal(i % 40))}\n");
        return Write(name, sb.ToString());
    }

    [Fact]
    public void Splits_a_triangle_ramp_into_up_and_down_sweeps()
    {
        var (ramp, ideal) = TriangleRamp();
        var path = WriteRampFile(ramp, "simulated_triangle.csv");
        var sweeps = SweepReader.ReadSweeps(new SweepFileOptions { Path = path, XColumn = "Ramp", YColumn = "CH1", Scan = ScanCoordinate.Ramp });

        Assert.Equal([RampDirection.Up, RampDirection.Down, RampDirection.Up], sweeps.Select(s => s.Direction));
        Assert.Equal(["simulated_triangle.csv (up #1)", "simulated_triangle.csv (down #1)", "simulated_triangle.csv (up #2)"],
            sweeps.Select(s => s.Name));
        Assert.Equal(ramp.Length, sweeps.Sum(s => s.Count));
        foreach (var s in sweeps)
        {
            Assert.InRange(s.Count, 280, 320); // turns are found within a few samples of the true apex (300 per leg)
            double sign = s.Direction == RampDirection.Up ? 1 : -1;
            for (int i = 1; i < s.Count; i++) Assert.True(sign * (s.X[i] - s.X[i - 1]) > 0, $"{s.Name} not monotone at {i}");
            // The monotone fit stays close to the simulated true ramp (ADC step 20 mV): compare away from the apexes.
            for (int i = 10; i < s.Count - 10; i++) Assert.InRange(s.X[i] - ideal[s.FirstSample + i], -0.06, 0.06);
            Assert.Equal(Signal((s.FirstSample + 3) % 40), s.Y[3], 15);
            Assert.Equal(ScanCoordinate.Ramp, s.Scan);
            Assert.Equal(path, s.Source);
        }
        Assert.Equal(0, sweeps[0].FirstSample);
        Assert.Equal(sweeps[0].Count, sweeps[1].FirstSample);
    }

    [Fact]
    public void Direction_choice_keeps_only_the_wanted_legs()
    {
        var path = WriteRampFile(TriangleRamp().Ramp, "simulated_triangle.csv");
        var o = new SweepFileOptions { Path = path, XColumn = "Ramp", YColumn = "CH1", Scan = ScanCoordinate.Ramp };

        var up = SweepReader.ReadSweeps(o with { Directions = DirectionChoice.Up });
        Assert.Equal(2, up.Count);
        Assert.All(up, s => Assert.Equal(RampDirection.Up, s.Direction));
        Assert.Equal("simulated_triangle.csv (up #2)", up[1].Name);

        var down = SweepReader.Split(SweepReader.Read(o), DirectionChoice.Down);
        Assert.Single(down);
        Assert.Equal(RampDirection.Down, down[0].Direction);
    }

    [Fact]
    public void Time_scan_with_ramp_column_splits_on_the_ramp_and_keeps_time_as_x()
    {
        var (ramp, _) = TriangleRamp(legs: 4, perLeg: 200);
        var path = WriteRampFile(ramp, "simulated_time_ramp.csv");
        var trace = SweepReader.Read(new SweepFileOptions { Path = path, XColumn = "Time", YColumn = "CH1", RampColumn = "Ramp" });
        Assert.NotNull(trace.Ramp);

        var sweeps = SweepReader.Split(trace);
        Assert.Equal([RampDirection.Up, RampDirection.Down, RampDirection.Up, RampDirection.Down], sweeps.Select(s => s.Direction));
        foreach (var s in sweeps)
        {
            Assert.Equal(trace.X[s.FirstSample], s.X[0]);
            Assert.Equal(ScanCoordinate.Time, s.Scan);
        }
    }

    [Fact]
    public void Sawtooth_flyback_is_dropped()
    {
        // Simulated sawtooth: 3 rising ramps of 250 samples, each followed by a 10-sample flyback.
        var r = new List<double>();
        for (int k = 0; k < 3; k++)
        {
            for (int i = 0; i < 250; i++) r.Add(4.0 * i / 249);
            for (int i = 0; i < 10; i++) r.Add(4.0 * (1 - (i + 1) / 10.0));
        }
        var trace = new RawTrace
        {
            Source = "simulated_saw.csv", X = r.ToArray(), Y = r.Select((_, i) => Signal(i % 40)).ToArray(),
            Ramp = r.ToArray(), Lines = r.Select((_, i) => i + 2).ToArray(), Scan = ScanCoordinate.Ramp,
        };
        var sweeps = SweepReader.Split(trace);
        Assert.Equal(3, sweeps.Count);
        Assert.All(sweeps, s => Assert.Equal(RampDirection.Up, s.Direction));
    }

    [Fact]
    public void Constant_ramp_is_an_error()
    {
        var ramp = Enumerable.Repeat(2.5, 100).ToArray();
        var path = WriteRampFile(ramp, "simulated_const_ramp.csv");
        var trace = SweepReader.Read(new SweepFileOptions { Path = path, XColumn = "Time", RampColumn = "Ramp" });
        var e = Assert.Throws<InputException>(() => SweepReader.Split(trace));
        Assert.StartsWith("ramp is constant", e.Message);
        Assert.Equal(path, e.File);
    }

    [Fact]
    public void Ramp_of_pure_noise_counts_as_constant()
    {
        var rng = new Random(3);
        var ramp = Enumerable.Range(0, 400).Select(_ => 2.5 + 0.01 * (rng.NextDouble() - 0.5)).ToArray();
        var trace = SweepReader.Read(new SweepFileOptions { Path = WriteRampFile(ramp, "simulated_noise_ramp.csv"), RampColumn = "Ramp" });
        var e = Assert.Throws<InputException>(() => SweepReader.Split(trace));
        Assert.StartsWith("ramp is constant", e.Message);
    }

    [Fact]
    public void Without_ramp_one_single_sweep_or_an_error_at_the_line_where_x_turns()
    {
        var path = Write("simulated_plain.csv", "t,y\n" + TimeRows(20));
        var one = SweepReader.ReadSweeps(new SweepFileOptions { Path = path, Directions = DirectionChoice.Up });
        Assert.Single(one);
        Assert.Equal(RampDirection.Single, one[0].Direction);
        Assert.Equal("simulated_plain.csv", one[0].Name);

        double[] x = [.. Enumerable.Range(0, 10).Select(i => (double)i), .. Enumerable.Range(0, 10).Select(i => 9.0 - i)];
        var trace = new RawTrace
        {
            Source = "simulated_turn.csv", X = x, Y = new double[20], Lines = Enumerable.Range(5, 20).ToArray(), Scan = ScanCoordinate.Ramp,
        };
        var e = Assert.Throws<InputException>(() => SweepReader.Split(trace));
        Assert.Equal("x is not monotonic at line 15; name a ramp column to split a triangle ramp", e.Message);
        Assert.Equal(15, e.Line);
    }

    [Fact]
    public void Turns_need_the_hysteresis_so_noise_alone_makes_none()
    {
        // Unsmoothed simulated triangle (3 legs of 300 samples, 0-5 V) with uniform noise 0.2 V peak to peak: every few samples the
        // record goes back, but only the two apexes move back by 5 % of the span (0.25 V).
        var rng = new Random(11);
        var (_, ideal) = TriangleRamp();
        var noisy = ideal.Select(v => v + 0.2 * (rng.NextDouble() - 0.5)).ToArray();
        var turns = RampSegments.Turns(noisy, RampSegments.TurnFraction * 5.0);
        Assert.Equal(2, turns.Count);
        Assert.InRange(turns[0], 270, 330);
        Assert.InRange(turns[1], 570, 630);
        Assert.True(RampSegments.Turns(noisy, 0.001 * 5.0).Count > 10); // without hysteresis the noise makes turns
    }

    [Fact]
    public void Monotone_fit_replaces_a_jittery_ramp_with_a_strictly_monotone_one()
    {
        double[] v = [.. Enumerable.Range(0, 50).Select(i => 0.1 * i + (i % 2 == 0 ? 0.08 : -0.08))];
        v[10] = v[11] + 0.01; // goes back
        var fit = RampSegments.MonotoneFit(v, RampDirection.Up)!;
        Assert.True(RampSegments.IsStrictlyMonotone(fit, 1));
        for (int i = 0; i < v.Length; i++) Assert.InRange(fit[i] - 0.1 * i, -0.05, 0.05);
        Assert.Null(RampSegments.MonotoneFit(v, RampDirection.Down));
    }
}
