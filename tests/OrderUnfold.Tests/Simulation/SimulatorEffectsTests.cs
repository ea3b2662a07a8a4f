using System.Numerics;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using OrderUnfold.Simulation;
using Xunit;

namespace OrderUnfold.Tests.Simulation;

/// <summary>
/// The simulator's effects of real data: transverse families, ring-down, clipping, intrinsic widths, datasheet errors,
/// one channel per file. All records are simulated; each physics check is against an independent computation in the
/// test (named beside it).
/// </summary>
public sealed class SimulatorEffectsTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("orderunfold-sim-").FullName;

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); }
        catch (IOException) { }
    }

    private static readonly Instrument Cavity = new("A", 1.5e9, 150, CavityGeometry.Planar);

    private static SimulationSpec Quiet(SimulatedCavity cavity, params SimulatedLine[] lines) => new()
    {
        Lines = lines.Length > 0 ? lines : [new SimulatedLine(0, 1.0)],
        Cavities = [cavity],
        NoiseFraction = 0,
        Bits = 0,
        Triangle = false,
        CalibrationSweeps = false,
        Seed = 3,
    };

    [Fact]
    public void Transverse_family_appears_one_minus_its_offset_after_each_tem00_peak_with_its_height()
    {
        var cavity = new SimulatedCavity { Instrument = Cavity, SpanFsr = 3.2, Samples = 16000, Families = [new TransverseFamily(0.4, 0.5)] };
        var spec = Quiet(cavity);
        var trace = Simulator.Trace(spec, cavity, false, new Random(1));
        // resonance of TEM00 where 0 − offset − scan ≡ 0 (mod FSR); of the family where −offset − 0.4·FSR − scan ≡ 0,
        // i.e. 0.6 FSR further along the scan (field-trace README convention: apparent offset = −o mod 1)
        var fsr = Cavity.FsrHz;
        double Along(int i) => ((trace.OffsetHz + trace.TrueScanHz[i]) / fsr % 1 + 1) % 1; // FSRs past the last TEM00 peak
        double Height(int i) => (trace.Signal[i] - cavity.DetectorOffset) / cavity.Gain;
        var tem00 = Enumerable.Range(0, trace.Signal.Length).Where(i => Math.Min(Along(i), 1 - Along(i)) < 1e-4).ToArray();
        var family = Enumerable.Range(0, trace.Signal.Length).Where(i => Math.Abs(Along(i) - 0.6) < 1e-4).ToArray();
        Assert.NotEmpty(tem00);
        Assert.NotEmpty(family);
        Assert.All(tem00, i => Assert.InRange(Height(i), 0.97, 1.01));
        Assert.All(family, i => Assert.InRange(Height(i), 0.48, 0.51));
    }

    [Fact]
    public void Intrinsic_width_response_is_the_airy_function_convolved_with_a_lorentzian()
    {
        // independent check: numerical convolution (trapezoid rule over ±400 widths) of the Airy function with an
        // area-normalised Lorentzian of FWHM W
        const double width = 4e6;
        foreach (var detuning in new[] { 0.0, 3e6, 10e6, 40e6, 0.5e9 })
        {
            double sum = 0, step = width / 200;
            for (var u = -400 * width; u <= 400 * width; u += step)
            {
                var lorentz = width / (2 * Math.PI) / (u * u + width * width / 4);
                sum += lorentz * Airy.Transmission(detuning - u, Cavity.FsrHz, Cavity.Finesse) * step;
            }

            Assert.Equal(sum, Simulator.StaticResponse(detuning, Cavity, width), 3);
        }

        // the area over one FSR is kept (the line's power does not change with its width)
        double Area(double w)
        {
            double a = 0;
            for (var k = 0; k < 200000; k++) a += Simulator.StaticResponse((k + 0.5) / 200000 * Cavity.FsrHz, Cavity, w);
            return a;
        }

        Assert.Equal(Area(0), Area(width), 6);
        Assert.Equal(Simulator.StaticResponse(1e7, Cavity, 0), Airy.Transmission(1e7, Cavity.FsrHz, Cavity.Finesse));
    }

    [Fact]
    public void Ring_down_in_the_slow_limit_is_the_lorentzian_of_the_cavity_linewidth()
    {
        var scan = Enumerable.Range(0, 4001).Select(i => -50e6 + i * 25e3).ToArray(); // 100 MHz over 40 ms: slow
        var response = Simulator.RingDownResponse(0, scan, 1e-5, Cavity);
        var gamma = Cavity.LinewidthHz;
        for (var i = 0; i < scan.Length; i += 50)
            Assert.Equal(1 / (1 + Math.Pow(2 * scan[i] / gamma, 2)), response[i], 3);
    }

    [Fact]
    public void Ring_down_of_a_fast_sweep_matches_the_integral_solution_and_ripples_on_the_trailing_side()
    {
        // sweep rate β with β·τ² = 10/π² (strongly dynamic: rate / linewidth² = 10), detuning Δ(t) = −β·t
        var tau = 1 / (Math.PI * Cavity.LinewidthHz);
        var beta = 10 * Cavity.LinewidthHz * Cavity.LinewidthHz;
        const double dt = 2e-9;
        var n = 850; // from 0.5 GHz below the resonance to 0.7 GHz above it: one resonance, no wrap to the next order
        var t0 = -n / 3 * dt;
        var scan = Enumerable.Range(0, n).Select(i => beta * (t0 + i * dt)).ToArray();
        var response = Simulator.RingDownResponse(0, scan, dt, Cavity);

        // independent solution: a(t) = (1/τ)∫₀^∞ e^{−u/τ} e^{i(φ(t) − φ(t−u))} du, φ(t) = 2π∫Δ = −πβt²,
        // evaluated by the composite Simpson rule over u up to 30τ
        double Exact(double t)
        {
            const int m = 60000;
            var h = 30 * tau / m;
            var sum = Complex.Zero;
            for (var k = 0; k <= m; k++)
            {
                var u = k * h;
                var w = k == 0 || k == m ? 1 : k % 2 == 1 ? 4 : 2;
                var phase = -Math.PI * beta * (t * t - (t - u) * (t - u));
                sum += w * Math.Exp(-u / tau) * Complex.FromPolarCoordinates(1, phase);
            }

            var a = sum * h / 3 / tau;
            return a.Magnitude * a.Magnitude;
        }

        // from 100 samples before the crossing (the integration starts from the steady state far off resonance)
        for (var i = n / 3 - 100; i < n; i += 37) Assert.Equal(Exact(t0 + i * dt), response[i], 3);

        // ripple: local maxima after the peak, none before it, with shrinking spacing
        var peak = Array.IndexOf(response, response.Max());
        Assert.True(peak > n / 3, "the peak lags the resonance crossing");
        var maxima = Enumerable.Range(1, n - 2).Where(i => response[i] > response[i - 1] && response[i] > response[i + 1] && response[i] > 1e-3).ToArray();
        Assert.DoesNotContain(maxima, i => i < peak);
        var after = maxima.Where(i => i > peak).ToArray();
        Assert.True(after.Length >= 3, $"{after.Length} ripple maxima after the peak");
        for (var k = 2; k < after.Length; k++) Assert.True(after[k] - after[k - 1] <= after[k - 1] - after[k - 2] + 1);
        Assert.True(response.Max() < 0.9, "a fast sweep does not reach the steady-state height");
    }

    [Fact]
    public void Full_scale_below_the_peak_clips_and_the_reader_finds_it()
    {
        var cavity = new SimulatedCavity { Instrument = Cavity, SpanFsr = 3.2, Samples = 8000 };
        var clippedSpec = Quiet(cavity) with { NoiseFraction = 0.004, Bits = 8, FullScale = 0.9 };
        var y = Simulator.Trace(clippedSpec, cavity, false, new Random(2)).Signal;
        var clipped = Digitiser.ClippedSamples(y, Digitiser.QuantisationStep(y));
        Assert.NotEmpty(clipped);
        Assert.All(clipped, i => Assert.Equal(y.Max(), y[i]));

        var plain = Simulator.Trace(clippedSpec with { FullScale = null }, cavity, false, new Random(2)).Signal;
        Assert.Empty(Digitiser.ClippedSamples(plain, Digitiser.QuantisationStep(plain)));

        var continuous = Simulator.Trace(clippedSpec with { Bits = 0 }, cavity, false, new Random(2)).Signal;
        var top = continuous.Max();
        Assert.True(continuous.Count(v => v == top) > 5);
        Assert.Null(Digitiser.QuantisationStep(continuous));
        Assert.NotEmpty(Digitiser.ClippedSamples(continuous, null));
    }

    [Fact]
    public void Datasheet_errors_state_other_values_than_simulated()
    {
        var cavity = new SimulatedCavity { Instrument = Instrument.FromLength("A", 0.1, CavityGeometry.Planar, 150), Samples = 2000 };
        var spec = Quiet(cavity) with { StatedFsrFactor = 1.02, StatedFinesseFactor = 1.0 / 3 };
        var output = SimulationFiles.Write(spec, _dir);
        var stated = Assert.Single(SetupReader.Read(output.SetupPath).Instruments);
        Assert.Equal(cavity.Instrument.FsrHz * 1.02, stated.FsrHz!.Value, 1e-9 * cavity.Instrument.FsrHz);
        Assert.Null(stated.LengthM);
        Assert.Equal(50, stated.Finesse!.Value, 9);
        Assert.Contains("datasheet errors on purpose", File.ReadAllText(output.SetupPath));
    }

    [Fact]
    public void Split_channels_read_back_like_the_single_file_export()
    {
        var cavity = new SimulatedCavity { Instrument = Cavity, SpanFsr = 3, Samples = 3000 };
        var spec = Quiet(cavity) with { Triangle = true, NoiseFraction = 0.004, Bits = 8, CalibrationSweeps = true };
        var one = SimulationFiles.Write(spec, Path.Combine(_dir, "one"));
        var two = SimulationFiles.Write(spec with { SplitChannels = true }, Path.Combine(_dir, "two"));
        Assert.Equal(5, two.Files.Count); // signal and ramp for source and calibration, and the setup
        Assert.StartsWith("# ", File.ReadLines(two.Setup.Sweeps[0].File.Path).First());

        var a = SetupReader.Read(one.SetupPath);
        var b = SetupReader.Read(two.SetupPath);
        Assert.NotNull(b.Sweeps[0].File.RampFile);
        var sa = SweepReader.ReadSweeps(a.Sweeps[0].File);
        var sb = SweepReader.ReadSweeps(b.Sweeps[0].File);
        Assert.Equal(sa.Select(s => (s.Direction, s.FirstSample, s.Count)), sb.Select(s => (s.Direction, s.FirstSample, s.Count)));
        for (var k = 0; k < sa.Count; k++) Assert.Equal(sa[k].Y, sb[k].Y);
        Assert.Equal(
            SweepReader.ReadSweeps(a.Calibrations[0].File).Select(s => s.Count),
            SweepReader.ReadSweeps(b.Calibrations[0].File).Select(s => s.Count));
    }
}
