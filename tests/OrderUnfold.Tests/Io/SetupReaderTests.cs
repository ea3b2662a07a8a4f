using OrderUnfold.Instruments;
using OrderUnfold.Io;
using CsCheck;
using Xunit;

namespace OrderUnfold.Tests.Io;

/// <summary>
/// Setup files: mapping of every key, the template, the writer round trip, and one test per kind of bad
/// input with the line (and sometimes column) it must point at. All data files here are simulated.
/// </summary>
public sealed class SetupReaderTests : IDisposable
{
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-setup-" + Guid.NewGuid().ToString("N"));

    /// <summary>A valid setup that uses every key at least once (both instrument variants, both sweep styles).</summary>
    private const string Valid = """
        # simulated two-cavity setup for tests
        [[instrument]]
        name = "short"
        geometry = "planar"
        length = "99.93 mm"
        refractive_index = 1.0
        finesse = 200
        mirror_loss = 0.0
        fix_finesse = true

        [[instrument]]
        name = "long"
        geometry = "confocal"
        fsr = "0.75 GHz"
        reflectance = 0.985
        mirror_loss = 0.001

        [[sweep]]
        instrument = "short"
        file = "short_source.csv"
        x_column = "ramp"
        y_column = 2
        scan = "ramp"
        delimiter = ";"
        decimal = "comma"
        header = true
        directions = "up"

        [[sweep]]
        instrument = "long"
        file = "data/long_source.csv"
        sample_interval = "2 ns"
        ramp_column = "3"
        delimiter = "tab"
        header = "false"

        [[calibration]]
        instrument = "short"
        file = "short_cal.csv"
        wavelength = "632.8 nm"
        axis_degree = 3

        [solve]
        window = ["-12 GHz", "12 GHz"]
        grid_step = "2 MHz"
        sparsity = 2.5
        smoothness = 0.1
        anchor_frequency = "351.7 THz"
        min_snr = 4
        source_wavelength = "852 nm"
        """;

    public SetupReaderTests()
    {
        Directory.CreateDirectory(Path.Combine(_dir, "data"));
        // Simulated sweeps: a few rows are enough, the setup reader only checks that the files exist.
        File.WriteAllText(Path.Combine(_dir, "short_source.csv"), "ramp;signal\n0,10;0,012\n0,20;0,250\n");
        File.WriteAllText(Path.Combine(_dir, "data", "long_source.csv"), "0.001\t0.5\t1.0\n0.002\t0.7\t1.1\n");
        File.WriteAllText(Path.Combine(_dir, "short_cal.csv"), "ramp;signal\n0,10;0,9\n0,20;0,1\n");
    }

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); } catch (IOException) { /* temp folder; best effort */ }
    }

    private string WriteSetup(string text, string name = "setup.toml")
    {
        var path = Path.Combine(_dir, name);
        File.WriteAllText(path, text);
        return path;
    }

    /// <summary>1-based line where <paramref name="marker"/> starts in <paramref name="text"/>.</summary>
    private static int LineOf(string text, string marker)
    {
        var at = text.IndexOf(marker, StringComparison.Ordinal);
        Assert.True(at >= 0, $"marker not in the test text: {marker}");
        Assert.True(text.IndexOf(marker, at + 1, StringComparison.Ordinal) < 0, $"marker not unique: {marker}");
        return text[..at].Count(c => c == '\n') + 1;
    }

    private static void Close(double expected, double? actual, double relative = 1e-12)
    {
        Assert.NotNull(actual);
        Assert.True(Math.Abs(actual!.Value - expected) <= relative * Math.Abs(expected),
            $"expected {expected:R} but got {actual.Value:R}");
    }

    [Fact]
    public void Valid_file_maps_every_key()
    {
        var path = WriteSetup(Valid);
        var setup = SetupReader.Read(path);

        Assert.Equal(Path.GetFullPath(path), setup.Path);
        Assert.Equal(2, setup.Instruments.Count);

        var shortCavity = setup.Instruments[0];
        Assert.Equal("short", shortCavity.Name);
        Assert.Equal(CavityGeometry.Planar, shortCavity.Geometry);
        Close(0.09993, shortCavity.LengthM);
        Assert.Null(shortCavity.FsrHz);
        Assert.Equal(1.0, shortCavity.RefractiveIndex);
        Assert.Equal(200, shortCavity.Finesse);
        Assert.Null(shortCavity.Reflectance);
        Assert.True(shortCavity.FixFinesse);
        Assert.Equal(LineOf(Valid, "[[instrument]]\nname = \"short\""), shortCavity.Line);
        // c / (2 L) with c = 299 792 458 m/s exactly (SI definition of the metre).
        Close(299_792_458.0 / (2 * 0.09993), shortCavity.ToInstrument().FsrHz);

        var longCavity = setup.Instruments[1];
        Assert.Equal(CavityGeometry.Confocal, longCavity.Geometry);
        Close(0.75e9, longCavity.FsrHz);
        Assert.Null(longCavity.LengthM);
        Assert.Equal(0.985, longCavity.Reflectance);
        Assert.Null(longCavity.Finesse);
        Assert.Equal(0.001, longCavity.MirrorLoss);
        Assert.False(longCavity.FixFinesse);

        var first = setup.Sweeps[0];
        Assert.Equal("short", first.Instrument);
        Assert.Equal(LineOf(Valid, "[[sweep]]\ninstrument = \"short\""), first.Line);
        Assert.Equal(new SweepFileOptions
        {
            Path = Path.Combine(_dir, "short_source.csv"),
            XColumn = "ramp",
            YColumn = "2",
            Scan = ScanCoordinate.Ramp,
            Delimiter = ';',
            DecimalComma = true,
            HasHeader = true,
            Directions = DirectionChoice.Up,
        }, first.File);

        var second = setup.Sweeps[1].File;
        Assert.Equal(Path.Combine(_dir, "data", "long_source.csv"), second.Path);
        Assert.True(Path.IsPathRooted(second.Path));
        Assert.Null(second.XColumn);
        Assert.Null(second.YColumn);
        Assert.Equal("3", second.RampColumn);
        Assert.Equal(ScanCoordinate.Time, second.Scan);
        Close(2e-9, second.SampleIntervalS);
        Assert.Equal('\t', second.Delimiter);
        Assert.Null(second.DecimalComma);
        Assert.False(second.HasHeader);
        Assert.Equal(DirectionChoice.Both, second.Directions);

        var cal = Assert.Single(setup.Calibrations);
        Assert.Equal("short", cal.Instrument);
        Assert.Equal(Path.Combine(_dir, "short_cal.csv"), cal.File.Path);
        Close(632.8e-9, cal.WavelengthM);
        Assert.Equal(3, cal.AxisDegree);
        Assert.Equal(LineOf(Valid, "[[calibration]]"), cal.Line);

        var solve = setup.Solve;
        Close(-12e9, solve.WindowStartHz);
        Close(12e9, solve.WindowEndHz);
        Close(2e6, solve.GridStepHz);
        Assert.Equal(2.5, solve.Sparsity);
        Assert.Equal(0.1, solve.Smoothness);
        Close(351.7e12, solve.AnchorFrequencyHz);
        Assert.Equal(4.0, solve.MinSnr);
        Close(852e-9, solve.SourceWavelengthM);
    }

    [Fact]
    public void Defaults_apply_when_optional_keys_are_left_out()
    {
        var path = WriteSetup("""
            [[instrument]]
            name = "only"
            fsr = "1 GHz"
            finesse = 50
            [[sweep]]
            instrument = "only"
            file = "short_source.csv"
            """);
        var setup = SetupReader.Read(path);
        var i = Assert.Single(setup.Instruments);
        Assert.Equal(CavityGeometry.Planar, i.Geometry);
        Assert.Equal(1.0, i.RefractiveIndex);
        Assert.Equal(0.0, i.MirrorLoss);
        Assert.False(i.FixFinesse);
        var f = Assert.Single(setup.Sweeps).File;
        Assert.Equal(new SweepFileOptions { Path = Path.Combine(_dir, "short_source.csv") }, f);
        Assert.Empty(setup.Calibrations);
        Assert.Equal(new SolveOptions(), setup.Solve);
    }

    [Fact]
    public void Template_parses_beside_the_files_it_names()
    {
        var template = SetupReader.Template();
        // Simulated exports, in the layouts the template's reading keys describe.
        File.WriteAllText(Path.Combine(_dir, "coarse_scan.csv"), "ramp,signal\n0.10,0.011\n0.20,0.342\n0.30,0.015\n");
        File.WriteAllText(Path.Combine(_dir, "fine_scan.csv"), "t,ramp,signal\n0,0.10,0.02\n1,0.20,0.81\n2,0.30,0.03\n");
        var setup = SetupReader.Read(WriteSetup(template, "template.toml"));

        Assert.Equal(["coarse", "fine"], setup.Instruments.Select(i => i.Name));
        Assert.Equal(2, setup.Sweeps.Count);
        Assert.All(setup.Sweeps, s => Assert.True(File.Exists(s.File.Path)));
        Assert.All(setup.Instruments, i => Assert.True(i.ToInstrument().FsrHz > 0));
        Assert.NotNull(setup.Solve.WindowStartHz);
        Assert.NotNull(setup.Solve.AnchorFrequencyHz);
    }

    [Fact]
    public void Template_mentions_every_key_with_a_comment()
    {
        var lines = SetupReader.Template().Split('\n');
        var keys = SetupSchema.InstrumentKeys.Concat(SetupSchema.SweepKeys).Concat(SetupSchema.CalibrationKeys).Concat(SetupSchema.SolveKeys).Distinct();
        foreach (var key in keys)
        {
            var uses = lines.Where(l => l.TrimStart('#', ' ').StartsWith(key + " =", StringComparison.Ordinal)).ToArray();
            Assert.True(uses.Length > 0, $"template lacks key {key}");
            Assert.Contains(uses, l => l.IndexOf('#', l.IndexOf('=')) > 0);
        }
    }

    [Fact]
    public void Documentation_describes_every_key()
    {
        var doc = FindRepoFile(Path.Combine("docs", "setup.md"));
        var text = File.ReadAllText(doc);
        var keys = SetupSchema.InstrumentKeys.Concat(SetupSchema.SweepKeys).Concat(SetupSchema.CalibrationKeys).Concat(SetupSchema.SolveKeys).Distinct();
        foreach (var key in keys) Assert.Contains($"`{key}`", text);
    }

    [Fact]
    public void Documentation_example_parses()
    {
        var doc = File.ReadAllText(FindRepoFile(Path.Combine("docs", "setup.md")));
        var start = doc.IndexOf("```toml\n", StringComparison.Ordinal) + "```toml\n".Length;
        var example = doc[start..doc.IndexOf("```", start, StringComparison.Ordinal)];
        foreach (var name in new[] { "wide.csv", "narrow.csv", "narrow_reference.csv" })
            File.WriteAllText(Path.Combine(_dir, name), "0.1,0.2\n0.2,0.4\n"); // simulated
        var setup = SetupReader.Read(WriteSetup(example, "doc.toml"));
        Assert.Equal(2, setup.Instruments.Count);
        Assert.Equal(3, Assert.Single(setup.Calibrations).AxisDegree);
        Close(780.2e-9, setup.Solve.SourceWavelengthM);
    }

    private static string FindRepoFile(string relative)
    {
        for (var d = new DirectoryInfo(AppContext.BaseDirectory); d is not null; d = d.Parent)
        {
            var candidate = Path.Combine(d.FullName, relative);
            if (File.Exists(candidate)) return candidate;
        }

        throw new FileNotFoundException($"{relative} not found above {AppContext.BaseDirectory}");
    }

    [Fact]
    public void Writer_output_reads_back_to_the_same_setup()
    {
        var outside = Path.Combine(_dir, "elsewhere");
        var setupDir = Path.Combine(_dir, "run");
        Directory.CreateDirectory(outside);
        Directory.CreateDirectory(Path.Combine(setupDir, "sweeps"));
        var inside = Path.Combine(setupDir, "sweeps", "a \"quoted\" name.csv");
        var far = Path.Combine(outside, "b.csv");
        var cal = Path.Combine(setupDir, "cal.csv");
        foreach (var f in new[] { inside, far, cal }) File.WriteAllText(f, "1,2\n"); // simulated

        var original = new Setup
        {
            Instruments =
            [
                new InstrumentSpec { Name = "a", LengthM = 0.0999312345678, Finesse = 213.4567, FixFinesse = true, RefractiveIndex = 1.000273 },
                new InstrumentSpec
                {
                    Name = "b", Geometry = CavityGeometry.Confocal, FsrHz = 1.4989622900e9 * 1.000000012345,
                    Reflectance = 0.98512345678, MirrorLoss = 0.0012,
                },
            ],
            Sweeps =
            [
                new SweepSpec
                {
                    Instrument = "a",
                    File = new SweepFileOptions
                    {
                        Path = inside, XColumn = "time", YColumn = "2", RampColumn = "ch 3", Delimiter = '\t',
                        DecimalComma = true, HasHeader = false, Directions = DirectionChoice.Down,
                    },
                },
                new SweepSpec
                {
                    Instrument = "b",
                    File = new SweepFileOptions { Path = far, SampleIntervalS = 2.5e-9 * 1.0000000007, Delimiter = ';', DecimalComma = false, HasHeader = true },
                },
            ],
            Calibrations =
            [
                new CalibrationSpec { Instrument = "b", File = new SweepFileOptions { Path = cal, Scan = ScanCoordinate.Ramp }, WavelengthM = 632.8e-9, AxisDegree = 4 },
                new CalibrationSpec { Instrument = "a", File = new SweepFileOptions { Path = cal, Delimiter = ',' } },
            ],
            Solve = new SolveOptions
            {
                WindowStartHz = -12.3456789e9, WindowEndHz = 11.5e9, GridStepHz = 2.000001e6, Sparsity = 2.75, Smoothness = 0.5,
                AnchorFrequencyHz = 351.72561234567e12, MinSnr = 6, SourceWavelengthM = 852.3471e-9,
            },
        };

        var setupPath = Path.Combine(setupDir, "setup.toml");
        SetupWriter.Save(original, setupPath);
        var text = File.ReadAllText(setupPath);
        Assert.Contains("sweeps/a \\\"quoted\\\" name.csv", text); // relative to the setup folder
        Assert.Contains(Path.GetFullPath(far), text);                // outside it: absolute

        Setup back;
        using (OrderUnfold.Io.InputLimits.Use(new OrderUnfold.Io.InputLimits { AllowOutsidePaths = true })) // one file lies outside the setup's folder
            back = SetupReader.Read(setupPath);
        Assert.Equal(original.Instruments.Count, back.Instruments.Count);
        for (var k = 0; k < original.Instruments.Count; k++)
        {
            var (o, r) = (original.Instruments[k], back.Instruments[k]);
            Assert.Equal(o.Name, r.Name);
            Assert.Equal(o.Geometry, r.Geometry);
            if (o.LengthM is double l) Close(l, r.LengthM, 1e-9); else Assert.Null(r.LengthM);
            if (o.FsrHz is double f) Close(f, r.FsrHz, 1e-9); else Assert.Null(r.FsrHz);
            Assert.Equal(o.RefractiveIndex, r.RefractiveIndex);
            Assert.Equal(o.Finesse, r.Finesse);
            Assert.Equal(o.Reflectance, r.Reflectance);
            Assert.Equal(o.MirrorLoss, r.MirrorLoss);
            Assert.Equal(o.FixFinesse, r.FixFinesse);
        }

        Assert.Equal(original.Sweeps.Select(s => s.Instrument), back.Sweeps.Select(s => s.Instrument));
        Assert.Equal(original.Sweeps[0].File, back.Sweeps[0].File);
        Assert.Equal(original.Sweeps[1].File with { SampleIntervalS = null }, back.Sweeps[1].File with { SampleIntervalS = null });
        Close(original.Sweeps[1].File.SampleIntervalS!.Value, back.Sweeps[1].File.SampleIntervalS, 1e-9);

        Assert.Equal(2, back.Calibrations.Count);
        Assert.Equal(original.Calibrations[0].File, back.Calibrations[0].File);
        Close(632.8e-9, back.Calibrations[0].WavelengthM, 1e-9);
        Assert.Equal(4, back.Calibrations[0].AxisDegree);
        Assert.Null(back.Calibrations[1].AxisDegree);
        Assert.Null(back.Calibrations[1].WavelengthM);
        Assert.Equal(original.Calibrations[1].File, back.Calibrations[1].File);

        var (os, rs) = (original.Solve, back.Solve);
        Close(os.WindowStartHz!.Value, rs.WindowStartHz, 1e-9);
        Close(os.WindowEndHz!.Value, rs.WindowEndHz, 1e-9);
        Close(os.GridStepHz!.Value, rs.GridStepHz, 1e-9);
        Close(os.AnchorFrequencyHz!.Value, rs.AnchorFrequencyHz, 1e-9);
        Close(os.SourceWavelengthM!.Value, rs.SourceWavelengthM, 1e-9);
        Assert.Equal(os.Sparsity, rs.Sparsity);
        Assert.Equal(os.Smoothness, rs.Smoothness);
        Assert.Equal(os.MinSnr, rs.MinSnr);
    }

    [Fact]
    public void Writer_quantities_round_trip_over_many_magnitudes()
    {
        // Property: any finite length, frequency or time written with a unit parses back within 1e-11 relative.
        Gen.Double[-1e16, 1e16].Sample(v =>
        {
            foreach (var (dimension, units) in new[]
            {
                (OrderUnfold.Units.Dimension.Frequency, new[] { ("Hz", 1.0), ("kHz", 1e3), ("MHz", 1e6), ("GHz", 1e9), ("THz", 1e12) }),
                (OrderUnfold.Units.Dimension.Length, new[] { ("pm", 1e-12), ("nm", 1e-9), ("um", 1e-6), ("mm", 1e-3), ("m", 1.0) }),
            })
            {
                var si = v * (dimension == OrderUnfold.Units.Dimension.Length ? 1e-13 : 1);
                var text = SetupWriter.Quantity(si, units, "value").Trim('"');
                var back = OrderUnfold.Units.Quantity.Parse(text, dimension);
                Assert.True(Math.Abs(back - si) <= 1e-11 * Math.Abs(si) + double.Epsilon, $"{si:R} -> {text} -> {back:R}");
            }
        }, iter: 2000);
    }

    [Fact]
    public void Writer_refuses_an_instrument_without_size()
    {
        var setup = new Setup
        {
            Instruments = [new InstrumentSpec { Name = "x", Finesse = 10 }],
            Sweeps = [],
        };
        Assert.Throws<ArgumentException>(() => SetupWriter.Write(setup, _dir));
    }

    /// <summary>(replace this, by this, line marker in the result, expected message fragment).</summary>
    public static TheoryData<string, string, string, string> BadInputs => new()
    {
        // unknown key, with the nearest accepted key suggested
        { "length = \"99.93 mm\"", "lenght = \"99.93 mm\"", "lenght", "unknown key 'lenght' in [[instrument]]; did you mean 'length'?" },
        { "length = \"99.93 mm\"", "length = \"-5 mm\"", "length = \"-5 mm\"", "length must be positive but got -5 mm" },
        { "length = \"99.93 mm\"", "length = \"1e-320 m\"", "[[instrument]]\nname = \"short\"", "FSR must be positive" },
        { "finesse = 200", "finesse = 0.5", "finesse = 0.5", "finesse must be at least 1 but got 0.5" },
        { "finesse = 200", "finesse = \"200\"", "finesse = \"200\"", "finesse must be a number but got \"200\" (a string)" },
        { "file = \"short_cal.csv\"", "file = \"nothere.csv\"", "file = \"nothere.csv\"", "file not found: " },
        // bare number where a unit is needed: Quantity's message lists the units
        { "length = \"99.93 mm\"", "length = 99.93", "length = 99.93", "\"99.93\" has no unit; a length needs one of m, cm, mm" },
        { "sample_interval = \"2 ns\"", "sample_interval = \"2\"", "sample_interval", "has no unit; a time needs one of s, ms" },
        { "grid_step = \"2 MHz\"", "grid_step = \"2 mm\"", "grid_step", "unknown unit \"mm\"" },
        { "name = \"short\"", "name = \"short", "name = \"short", "TOML syntax error: Invalid newline in a string (is a closing quote missing?)" },
        { "length = \"99.93 mm\"", "length = \"99.93 mm\"\nfsr = \"1.5 GHz\"", "fsr = \"1.5 GHz\"", "both length and fsr" },
        { "length = \"99.93 mm\"\n", "", "[[instrument]]\nname = \"short\"", "needs either length" },
        { "finesse = 200", "finesse = 200\nreflectance = 0.95", "reflectance = 0.95", "both finesse and reflectance" },
        { "reflectance = 0.985\n", "", "[[instrument]]\nname = \"long\"", "needs either finesse" },
        { "reflectance = 0.985", "reflectance = 1.2", "reflectance = 1.2", "reflectance must lie strictly between 0 and 1 but got 1.2" },
        { "reflectance = 0.985", "reflectance = 0.05", "reflectance = 0.05", "below 1" },
        { "refractive_index = 1.0", "refractive_index = 0.8", "refractive_index", "refractive_index must be at least 1 but got 0.8" },
        { "mirror_loss = 0.001", "mirror_loss = -0.1", "mirror_loss = -0.1", "mirror_loss must be a fraction" },
        { "mirror_loss = 0.001", "mirror_loss = 0.02", "mirror_loss = 0.02", "reflectance + mirror_loss must stay below 1" },
        { "geometry = \"confocal\"", "geometry = \"spherical\"", "geometry = \"spherical\"", "geometry must be one of \"planar\" | \"confocal\" but got \"spherical\"" },
        { "instrument = \"long\"", "instrument = \"lnog\"", "instrument = \"lnog\"", "[[sweep]] names instrument 'lnog', which no [[instrument]] defines (defined: short, long); did you mean 'long'?" },
        { "name = \"long\"", "name = \"short\"\n", "name = \"short\"\n\ngeometry", "'short' is already used by the [[instrument]] on line 2" },
        { "window = [\"-12 GHz\", \"12 GHz\"]", "window = [\"12 GHz\", \"-12 GHz\"]", "window", "window must run from a lower to a higher frequency but got \"12 GHz\" to \"-12 GHz\"" },
        { "window = [\"-12 GHz\", \"12 GHz\"]", "window = [\"-12 GHz\"]", "window", "window must be an array of two frequencies" },
        { "window = [\"-12 GHz\", \"12 GHz\"]", "window = [\"-12 GHz\", 12]", "window", "window end: \"12\" has no unit" },
        { "instrument = \"short\"\nfile = \"short_cal.csv\"", "instrument = \"middle\"\nfile = \"short_cal.csv\"", "instrument = \"middle\"", "names instrument 'middle'" },
        { "[solve]", "[[calibration]]\ninstrument = \"short\"\nfile = \"./short_source.csv\"\n\n[solve]", "instrument = \"short\"\nfile = \"./short_source.csv\"", "already has a [[calibration]] (line 37)" },
        { "axis_degree = 3", "axis_degree = 9", "axis_degree", "expected an integer from 1 to 7 or \"auto\" but got 9" },
        { "[solve]", "[solver]", "[solver]", "unknown table [solver]; did you mean [solve]?" },
        { "[solve]", "[[solve]]", "[[solve]]", "expected [solve]" },
        { "# simulated two-cavity setup for tests", "sparsity = 3", "sparsity = 3", "stands outside any table; did you mean to put it under [solve]?" },
        { "y_column = 2", "y_column = 0", "y_column = 0", "column number from 1 up but got 0" },
        { "y_column = 2", "y_column = 2.5", "y_column = 2.5", "got 2.5 (a number)" },
        { "header = true", "header = \"maybe\"", "header = \"maybe\"", "header must be one of \"auto\" | \"true\" | \"false\" but got \"maybe\"" },
        { "delimiter = \";\"", "delimiter = \"|\"", "delimiter = \"|\"", "delimiter must be one of" },
        { "sample_interval = \"2 ns\"", "sample_interval = \"2 ns\"\nscan = \"ramp\"", "sample_interval", "contradicts scan = \"ramp\"" },
        { "min_snr = 4", "min_snr = 0", "min_snr", "min_snr must be positive but got 0" },
        { "sparsity = 2.5", "sparsity = -1", "sparsity", "sparsity must be zero or positive but got -1" },
        { "fix_finesse = true", "fix_finesse = \"yes\"", "fix_finesse", "fix_finesse must be true or false but got \"yes\" (a string)" },
        { "x_column = \"ramp\"", "x.column = \"ramp\"", "x.column", "dotted key 'x.column'" },
    };

    [Theory]
    [MemberData(nameof(BadInputs))]
    public void Bad_input_points_at_its_line(string replace, string by, string marker, string fragment)
    {
        Assert.Contains(replace, Valid);
        var text = ReplaceFirst(Valid, replace, by);
        var path = WriteSetup(text);
        var e = Assert.Throws<InputException>(() => SetupReader.Read(path));
        Assert.Contains(fragment, e.Message);
        Assert.Equal(path, e.File);
        Assert.Equal(LineOf(text, marker), e.Line);
        Assert.NotNull(e.Column);
    }

    private static string ReplaceFirst(string text, string old, string by)
    {
        var at = text.IndexOf(old, StringComparison.Ordinal);
        return text[..at] + by + text[(at + old.Length)..];
    }

    [Fact]
    public void Unknown_key_points_at_the_key_and_negative_length_at_the_value()
    {
        var text = Valid.Replace("finesse = 200", "finese = 200");
        var e = Assert.Throws<InputException>(() => SetupReader.Read(WriteSetup(text)));
        Assert.Equal((LineOf(text, "finese"), 1), (e.Line, e.Column));
        Assert.Contains("did you mean 'finesse'?", e.Message);
        Assert.Contains("accepted keys: name, geometry, length, fsr", e.Message);

        text = Valid.Replace("length = \"99.93 mm\"", "length   = \"-5 mm\"");
        e = Assert.Throws<InputException>(() => SetupReader.Read(WriteSetup(text)));
        Assert.Equal((LineOf(text, "length   ="), 12), (e.Line, e.Column));
        Assert.StartsWith(Path.Combine(_dir, "setup.toml") + $":{e.Line}:12: length must be positive", e.Located);
    }

    [Fact]
    public void Missing_file_names_the_absolute_path()
    {
        var text = Valid.Replace("data/long_source.csv", "data/missing.csv");
        var e = Assert.Throws<InputException>(() => SetupReader.Read(WriteSetup(text)));
        Assert.Equal($"file not found: {Path.Combine(_dir, "data", "missing.csv")}", e.Message);
        Assert.Equal(LineOf(text, "data/missing.csv"), e.Line);
    }

    [Fact]
    public void A_setup_without_sweeps_is_refused()
    {
        var at = Valid.IndexOf("[[sweep]]", StringComparison.Ordinal);
        var end = Valid.IndexOf("[[calibration]]", StringComparison.Ordinal);
        var text = Valid[..at] + Valid[end..];
        var e = Assert.Throws<InputException>(() => SetupReader.Read(WriteSetup(text)));
        Assert.Contains("no [[sweep]] table", e.Message);
    }

    [Fact]
    public void A_missing_setup_file_is_an_input_error()
    {
        var e = Assert.Throws<InputException>(() => SetupReader.Read(Path.Combine(_dir, "none.toml")));
        Assert.Contains("setup file not found", e.Message);
    }

    [Fact]
    public void Syntax_error_carries_the_parser_position()
    {
        var text = "[[instrument]]\nname = \"a\"\nfsr = = \"1 GHz\"\n";
        var e = Assert.Throws<InputException>(() => SetupReader.ReadText(text, Path.Combine(_dir, "s.toml")));
        Assert.StartsWith("TOML syntax error", e.Message);
        Assert.Equal(3, e.Line);
        Assert.Equal(7, e.Column);
    }

    private const string RampFileHead = """
        [[instrument]]
        name = "cav"
        length = "55 mm"
        finesse = 150
        [[sweep]]
        instrument = "cav"
        file = "short_source.csv"

        """;

    [Fact]
    public void Ramp_file_keys_are_read_resolved_and_written_back()
    {
        var path = WriteSetup(RampFileHead + """
            ramp_file = "data/long_source.csv"
            ramp_time_column = 1
            ramp_value_column = "3"
            scan = "ramp"
            sample_interval = "2 us"
            """);
        var file = Assert.Single(SetupReader.Read(path).Sweeps).File;
        Assert.Equal(Path.Combine(_dir, "data", "long_source.csv"), file.RampFile);
        Assert.Equal("1", file.RampTimeColumn);
        Assert.Equal("3", file.RampValueColumn);
        Close(2e-6, file.SampleIntervalS); // allowed with scan = "ramp" when the ramp comes from its own file

        var written = SetupWriter.Write(SetupReader.Read(path), _dir);
        Assert.Contains("ramp_file = \"data/long_source.csv\"", written);
        var back = Assert.Single(SetupReader.ReadText(written, Path.Combine(_dir, "again.toml")).Sweeps).File;
        Assert.Equal(file, back);
    }

    [Theory]
    [InlineData("ramp_time_column = 1", "ramp_time_column", "no ramp_file")]
    [InlineData("ramp_value_column = \"Ampl\"", "ramp_value_column", "no ramp_file")]
    [InlineData("ramp_file = \"short_source.csv\"\nramp_column = 2", "ramp_file", "ramp_column")]
    [InlineData("ramp_file = \"missing.csv\"", "ramp_file", "not found")]
    public void Ramp_file_mistakes_point_at_their_key(string keys, string key, string says)
    {
        var text = RampFileHead + keys + "\n";
        var e = Assert.Throws<InputException>(() => SetupReader.Read(WriteSetup(text)));
        Assert.Contains(says, e.Message);
        Assert.Equal(LineOf(text, key + " ="), e.Line);
    }
}
