using System.Globalization;
using System.Text;
using System.Text.Json.Nodes;
using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;
using Xunit.Abstractions;
using static OrderUnfold.Tests.SelfCalibration.SelfCalibrationData;

namespace OrderUnfold.Tests.SelfCalibration;

/// <summary>Calibration through the pipeline and the <c>calibrate</c> command: reference laser at another wavelength,
/// self-calibration of messy files, the calibration file, the report and the plots, bad input. All data simulated.</summary>
public sealed class CalibrationPipelineTests(ITestOutputHelper output) : IDisposable
{
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-calpipe-" + Guid.NewGuid().ToString("N"));

    public void Dispose()
    {
        if (Directory.Exists(_dir)) Directory.Delete(_dir, recursive: true);
    }

    private static SimulationSpec TwoCavities(bool calibrationSweeps, int seed = 41) => new()
    {
        Label = "SIMULATED DATA: calibration pipeline test",
        Lines = FourLines(),
        Cavities =
        [
            Cavity("A", 0.1, finesse: 120, samples: 6000, spanFsr: 4),
            Cavity("B", 0.0937, finesse: 120, samples: 6000, spanFsr: 4, quadratic: 0.05, cubic: -0.02, hysteresis: 0.05),
        ],
        Seed = seed,
        CalibrationSweeps = calibrationSweeps,
    };

    [Fact]
    public void A_calibration_laser_at_another_wavelength_transfers_by_the_wavelength_ratio()
    {
        // A 780 nm reference laser calibrates a cavity used for a 1064 nm source: one FSR of the reference is
        // λ_cal/2 of mirror travel, which moves the source's comb by λ_cal/λ_source FSRs.
        var cav = Cavity("A", 0.1, finesse: 150, samples: 12000, spanFsr: 5);
        var spec = new SimulationSpec { Lines = FourLines(), Cavities = [cav], Seed = 8, CalibrationWavelengthM = 780e-9, SourceWavelengthM = 1064e-9 };
        var rng = new Random(8);
        var src = Simulator.Trace(spec, cav, false, rng);
        var cal = Simulator.Trace(spec, cav, true, rng);
        var ratio = 780.0 / 1064.0;
        var srcHalves = SimulatedSweeps.Halves(src, "A");
        var calHalves = SimulatedSweeps.Halves(cal, "A cal");
        for (var k = 0; k < 2; k++)
        {
            var transferred = AxisCalibrator.FromCalibrationSweep(calHalves[k], cav.Instrument, wavelengthRatio: ratio);
            var naive = AxisCalibrator.FromCalibrationSweep(calHalves[k], cav.Instrument);
            var truth = src.TrueScanHz[srcHalves[k].FirstSample..(srcHalves[k].FirstSample + srcHalves[k].Count)];
            var good = AxisRmsHz(transferred.Axis, srcHalves[k], truth);
            var bad = AxisRmsHz(naive.Axis, srcHalves[k], truth);
            output.WriteLine($"{srcHalves[k].Name}: {transferred.PointCount} reference peaks; with the ratio {good / 1e3:F1} kHz RMS, without {bad / 1e6:F0} MHz RMS");
            Assert.InRange(good, 0, 0.1 * cav.Instrument.LinewidthHz);
            Assert.True(bad > 30 * cav.Instrument.LinewidthHz);
            // the finesse measured on the reference's peaks is the cavity's
            Assert.InRange(transferred.Finesse!.Value, 140, 160);
        }

        // the same through a setup file: [[calibration]] wavelength and [solve] source_wavelength
        var written = SimulationFiles.WriteScenario(spec with { Label = "SIMULATED DATA: wavelength transfer" }, _dir);
        var setup = SetupReader.Read(written.SetupPath);
        Assert.Equal(780e-9, setup.Calibrations[0].WavelengthM!.Value, 12);
        var set = UnfoldPipeline.Calibrate(setup, null, out _);
        Assert.All(set.Axes, a => Assert.False(a.FromRepeats));
        var up = set.Axes.Single(a => a.Direction == RampDirection.Up);
        // over one FSR of the source the axis rises by one FSR: compare its slope with the true one mid-sweep
        var x0 = 0.5 * (up.Axis.XMin + up.Axis.XMax);
        var i0 = (int)Math.Round(x0 / spec.SampleIntervalS);
        var trueSlope = (src.TrueScanHz[i0 + 1] - src.TrueScanHz[i0 - 1]) / (2 * spec.SampleIntervalS);
        Assert.InRange(up.Axis.Derivative(x0) / trueSlope, 0.995, 1.005);
        // the reference's peaks repeat every FSR·λ_cal/λ_source on the source's axis: that period is still one FSR of the
        // cavity, so the settled FSR is the stated one
        Assert.Equal(cav.Instrument.FsrHz, set.Instruments.Single().FsrHz, 1e-3);
    }

    /// <summary>Writes a simulated record as a scope export: preamble, leading NaN rows, 8-bit steps (from the simulator).</summary>
    private static string ScopeFile(string path, SimulatedTrace t, int nanRows = 12)
    {
        var c = CultureInfo.InvariantCulture;
        var sb = new StringBuilder("# SIMULATED DATA: messy scope export\nModel,SIMULATED\nSample interval,2e-06\n\ntime_s,ramp_V,signal_V\n");
        for (var i = 0; i < nanRows; i++) sb.Append(((i - nanRows) * 2e-6).ToString("G9", c)).Append(",NaN,NaN\n");
        for (var i = 0; i < t.Signal.Length; i++)
            sb.Append(t.TimeS[i].ToString("G9", c)).Append(',').Append(t.RampV[i].ToString("F4", c)).Append(',').Append(t.Signal[i].ToString("G6", c)).Append('\n');
        File.WriteAllText(path, sb.ToString());
        return path;
    }

    [Fact]
    public void Calibrate_command_self_calibrates_messy_scope_files_and_writes_a_reusable_calibration_a_report_and_plots()
    {
        Directory.CreateDirectory(_dir);
        var spec = TwoCavities(calibrationSweeps: false);
        var rng = new Random(spec.Seed);
        foreach (var cav in spec.Cavities) ScopeFile(Path.Combine(_dir, $"{cav.Instrument.Name}.csv"), Simulator.Trace(spec, cav, false, rng));
        var setupPath = Path.Combine(_dir, "setup.toml");
        File.WriteAllText(setupPath, """
            # simulated two-cavity setup without calibration sweeps
            [[instrument]]
            name = "A"
            length = "100 mm"
            finesse = 120

            [[instrument]]
            name = "B"
            length = "93.7 mm"
            finesse = 90

            [[sweep]]
            instrument = "A"
            file = "A.csv"
            x_column = "time_s"
            y_column = "signal_V"
            ramp_column = "ramp_V"

            [[sweep]]
            instrument = "B"
            file = "B.csv"
            x_column = "time_s"
            y_column = "signal_V"
            ramp_column = "ramp_V"

            [solve]
            self_calibrate = "auto"
            """);
        var outDir = Path.Combine(_dir, "cal");
        var stdout = new StringWriter();
        var stderr = new StringWriter();
        var code = OrderUnfold.Cli.Cli.Run(["calibrate", setupPath, "--out", outDir, "--quiet"], stdout, stderr);
        output.WriteLine(stdout.ToString());
        output.WriteLine(stderr.ToString());
        Assert.Equal(0, code);

        // the calibration file reads back and fits this setup; B's finesse was measured (stated 90, true 120)
        var set = CalibrationFile.Read(Path.Combine(outDir, CalibrationReport.CalibrationFileName));
        Assert.Equal(4, set.Axes.Count);
        Assert.All(set.Axes, a => Assert.Contains("self-calibration", a.Method));
        Assert.InRange(set.Instruments.Single(i => i.Name == "B").Finesse, 114, 126);
        var setup = SetupReader.Read(setupPath);
        CalibrationFile.CheckAgainst(set, setup.Instruments, "calibration.json");
        var other = setup.Instruments.Select(i => i with { FsrHz = 2.5e9, LengthM = null }).ToList();
        var e = Assert.Throws<InputException>(() => CalibrationFile.CheckAgainst(set, other, "calibration.json"));
        Assert.Contains("made for another instrument", e.Message);

        // the report: method, pairs, residual in Hz and linewidths, finesse with its uncertainty
        var report = JsonNode.Parse(File.ReadAllText(Path.Combine(outDir, CalibrationReport.FileName)))!;
        var axes = report["axes"]!.AsArray();
        Assert.Equal(4, axes.Count);
        Assert.All(axes, a =>
        {
            Assert.True((bool)a!["from_repeats"]!);
            Assert.True((int)a["pairs_used"]! >= 8);
            Assert.InRange((double)a["residual_rms_linewidths"]!, 0, 0.1);
            Assert.True((double)a["finesse_sigma"]! > 0);
            Assert.NotNull(a["finesse_fit"]!["profile_measured"]);
        });
        // the plots: axis with residuals, Airy fit over a peak, averaged peak shape
        foreach (var name in new[] { "axis-a-up.png", "axis-b-down.png", "finesse-a-up.png", "profile-b-up.png" })
        {
            var png = Path.Combine(outDir, name);
            Assert.True(File.Exists(png), $"{name} missing");
            var head = File.ReadAllBytes(png)[..8];
            Assert.Equal(new byte[] { 0x89, 0x50, 0x4E, 0x47, 0x0D, 0x0A, 0x1A, 0x0A }, head);
        }

        Assert.Contains("finesse", stdout.ToString());
    }

    [Fact]
    public void Self_calibrate_never_without_calibration_sweeps_is_an_error_with_the_remedy()
    {
        var written = SimulationFiles.WriteScenario(TwoCavities(calibrationSweeps: false), _dir, new SolveOptions { SelfCalibrate = SelfCalibrationMode.Never });
        var set = UnfoldPipeline.Calibrate(SetupReader.Read(written.SetupPath), null, out _);
        Assert.Empty(set.Axes);
        // nothing calibrated: the unfold stops at the first sweep with the remedy
        var run = Xunit.Record.Exception(() => UnfoldPipeline.Run(written.SetupPath));
        output.WriteLine(run?.Message);
        Assert.IsType<InputException>(run);
        Assert.Contains("self_calibrate", run.Message);
    }

    [Fact]
    public void Always_fits_the_source_repeats_jointly_with_the_calibration_peaks()
    {
        var written = SimulationFiles.WriteScenario(TwoCavities(calibrationSweeps: true, seed: 43), _dir, new SolveOptions { SelfCalibrate = SelfCalibrationMode.Always });
        var set = UnfoldPipeline.Calibrate(SetupReader.Read(written.SetupPath), null, out var warnings);
        foreach (var a in set.Axes) output.WriteLine($"{a.Source}: {a.Method}");
        Assert.Equal(4, set.Axes.Count(a => a.FromRepeats));
        Assert.All(set.Axes.Where(a => a.FromRepeats), a => Assert.Contains("jointly with the calibration sweep", a.Method));
        // with auto, four or more calibration peaks per direction that the polynomial fits within a twentieth of a
        // linewidth stand alone; a direction whose calibration fits worse is joined by the source's repeats
        var auto = SetupReader.Read(written.SetupPath) with { Solve = new SolveOptions() };
        var setAuto = UnfoldPipeline.Calibrate(auto, null, out _);
        foreach (var cal in setAuto.Axes.Where(a => !a.FromRepeats))
        {
            var linewidth = setAuto.Instruments.Single(i => i.Name == cal.Instrument).LinewidthHz;
            var joined = setAuto.Axes.Any(a => a.FromRepeats && a.Instrument == cal.Instrument && a.Direction == cal.Direction);
            Assert.Equal(cal.PointCount < 4 || cal.ResidualRmsHz > CalibrationSteps.JointResidualLinewidths * linewidth, joined);
        }
    }

    [Fact]
    public void Calibrate_command_rejects_a_bad_option_value()
    {
        var stdout = new StringWriter();
        var stderr = new StringWriter();
        var code = OrderUnfold.Cli.Cli.Run(["calibrate", "x.toml", "--self-calibrate", "sometimes"], stdout, stderr);
        Assert.Equal(2, code);
        Assert.Contains("auto, always or never", stderr.ToString());
        code = OrderUnfold.Cli.Cli.Run(["calibrate", "x.toml", "--known-interval", "20"], stdout, stderr);
        Assert.Equal(2, code);
        Assert.Contains("MHz", stderr.ToString());
    }

    [Fact]
    public void Setup_keys_for_self_calibration_read_write_and_refuse_bad_values()
    {
        Directory.CreateDirectory(_dir);
        File.WriteAllText(Path.Combine(_dir, "a.csv"), "0,1\n1,2\n"); // simulated placeholder
        var head = "[[instrument]]\nname = \"A\"\nfsr = \"1.5 GHz\"\nfinesse = 100\n\n[[sweep]]\ninstrument = \"A\"\nfile = \"a.csv\"\n\n[solve]\n";
        var path = Path.Combine(_dir, "s.toml");
        var setup = SetupReader.ReadText(head + "self_calibrate = \"always\"\nknown_interval = \"20 MHz\"\nrefine_fsr = true\n", path);
        Assert.Equal(SelfCalibrationMode.Always, setup.Solve.SelfCalibrate);
        Assert.Equal(20e6, setup.Solve.KnownIntervalHz);
        Assert.True(setup.Solve.RefineFsr);
        var back = SetupReader.ReadText(SetupWriter.Write(setup, _dir), path);
        Assert.Equal(setup.Solve.SelfCalibrate, back.Solve.SelfCalibrate);
        Assert.Equal(setup.Solve.KnownIntervalHz, back.Solve.KnownIntervalHz);
        Assert.Equal(setup.Solve.RefineFsr, back.Solve.RefineFsr);
        var defaults = SetupReader.ReadText(head, path).Solve;
        Assert.Equal(SelfCalibrationMode.Auto, defaults.SelfCalibrate);
        Assert.Null(defaults.KnownIntervalHz);
        Assert.False(defaults.RefineFsr);

        var e1 = Assert.Throws<InputException>(() => SetupReader.ReadText(head + "self_calibrate = \"sometimes\"\n", path));
        Assert.Equal(11, e1.Line);
        var e2 = Assert.Throws<InputException>(() => SetupReader.ReadText(head + "known_interval = 20\n", path));
        Assert.Contains("MHz", e2.Message);
        var e3 = Assert.Throws<InputException>(() => SetupReader.ReadText(head + "known_interval = \"-20 MHz\"\n", path));
        Assert.Contains("positive", e3.Message);
    }
}
