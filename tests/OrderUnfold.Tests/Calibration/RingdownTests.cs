using OrderUnfold.Tests.FieldTraces;
using System.Numerics;
using System.Text.Json;
using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Calibration;

/// <summary>
/// Ring-down recognition, the swept-cavity fit and the corrected signal. The simulated sweeps here are made by
/// integrating the swept-cavity field equation da/dt = (−1/τ + i·2π·r·(t − t₀))·a + 1/τ with a classical fourth-order
/// Runge–Kutta scheme at 16 steps per sample (independent of the exponential integrator in <see cref="RingdownModel"/>).
/// </summary>
public class RingdownTests(ITestOutputHelper output)
{
    /// <summary>SIMULATED: |a|² of one resonance crossed at <paramref name="crossing"/>, by RK4 (normalised: static peak 1).</summary>
    private static double[] Rk4Response(int n, double crossing, double tau, double rate, int steps = 16)
    {
        var result = new double[n];
        // start far before the crossing on the adiabatic field
        var start = crossing - Math.Max(15 * tau, 40 / Math.Sqrt(rate));
        var first = (int)Math.Max(0, Math.Floor(start));
        Complex Rhs(double t, Complex a) => new Complex(-1 / tau, 2 * Math.PI * rate * (t - crossing)) * a + 1 / tau;
        var t0 = Math.Min(first, start);
        var a = (1 / tau) / new Complex(1 / tau, -2 * Math.PI * rate * (t0 - crossing));
        var h = 1.0 / steps;
        var t = t0;
        // integrate up to the first sample
        while (t < first - 1e-12)
        {
            var step = Math.Min(h, first - t);
            a = Rk4Step(Rhs, t, a, step);
            t += step;
        }

        for (var i = first; i < n; i++)
        {
            result[i] = (a * Complex.Conjugate(a)).Real;
            for (var s = 0; s < steps; s++)
            {
                a = Rk4Step(Rhs, t, a, h);
                t += h;
            }

            t = i + 1;
        }

        // before `first` the quasi-static Lorentzian
        for (var i = 0; i < first; i++) result[i] = RingdownModel.Lorentzian(i, crossing, RingdownModel.StaticFwhmSamples(tau, rate));
        return result;
    }

    private static Complex Rk4Step(Func<double, Complex, Complex> f, double t, Complex a, double h)
    {
        var k1 = f(t, a);
        var k2 = f(t + h / 2, a + h / 2 * k1);
        var k3 = f(t + h / 2, a + h / 2 * k2);
        var k4 = f(t + h, a + h * k3);
        return a + h / 6 * (k1 + 2 * k2 + 2 * k3 + k4);
    }

    /// <summary>SIMULATED sweep: peaks (crossing, static height) with one τ and rate, background, Gaussian noise, 8-bit quantisation.</summary>
    private static Sweep SimulatedSweep(int n, (double Crossing, double Height)[] peaks, double tau, double rate, double noise, int seed, double dt = 2e-9)
    {
        var rng = new Random(seed);
        var y = new double[n];
        foreach (var (c, h) in peaks)
        {
            var p = Rk4Response(n, c, tau, rate);
            for (var i = 0; i < n; i++) y[i] += h * p[i];
        }

        const double lo = -0.05, hi = 1.0;
        var lsb = (hi - lo) / 255;
        for (var i = 0; i < n; i++)
        {
            var v = 0.01 + y[i] + noise * OrderUnfold.Simulation.Simulator.Gaussian(rng);
            y[i] = lo + Math.Clamp(Math.Round((v - lo) / lsb), 0, 255) * lsb;
        }

        return new Sweep
        {
            Name = "simulated",
            Source = "simulated",
            X = Enumerable.Range(0, n).Select(i => i * dt).ToArray(),
            Y = y,
            Scan = ScanCoordinate.Time,
        };
    }

    [Fact]
    public void ExponentialIntegratorAgreesWithRungeKutta()
    {
        // SIMULATED: a strongly dynamic crossing (π²rτ² ≈ 9.9), ringing up to ~0.25 cycles per sample inside the window
        const double tau = 31, rate = 1.05e-3, crossing = 300.4;
        var reference = Rk4Response(700, crossing, tau, rate);
        var model = new double[500];
        RingdownModel.Power(model, 100, crossing, tau, rate);
        var fine = new double[500];
        RingdownModel.Power(fine, 100, crossing, tau, rate, 16);
        for (var i = 0; i < 500; i++)
        {
            Assert.True(Math.Abs(model[i] - reference[100 + i]) < 1e-3, $"sample {100 + i}: {model[i]} vs RK4 {reference[100 + i]}");
            Assert.True(Math.Abs(fine[i] - reference[100 + i]) < 1e-4, $"sample {100 + i}: {fine[i]} vs RK4 {reference[100 + i]}");
        }

        // slow-sweep limit: the static Lorentzian of FWHM 1/(πτr) (the steady state of the same equation)
        var slow = new double[400];
        RingdownModel.Power(slow, 0, 200, 2, 2e-4);
        var w = RingdownModel.StaticFwhmSamples(2, 2e-4);
        for (var i = 0; i < 400; i++) Assert.True(Math.Abs(slow[i] - RingdownModel.Lorentzian(i, 200, w)) < 0.01);
    }

    [Fact]
    public void SimulatedRingdownIsRecognisedFittedAndCorrected()
    {
        // SIMULATED: τ = 25 samples (50 ns at 2 ns), r = 1.2e-3 cycles/sample² (3e14 Hz/s): π²rτ² ≈ 7.4
        const double tau = 25, rate = 1.2e-3, dt = 2e-9;
        var truth = new[] { (800.3, 0.8), (2000.7, 0.8), (3100.2, 0.35), (3700.5, 0.1) };
        var sweep = SimulatedSweep(4400, truth, tau, rate, 0.004, 3, dt);

        var prep = RingdownHandling.Prepare(sweep);
        output.WriteLine(prep.Evidence.Summary);
        output.WriteLine(prep.Method);
        foreach (var p in prep.Peaks)
            output.WriteLine($"t0 {p.Crossing:F2} ± {p.CrossingSigma:F2}  τ {p.Tau:F2} ± {p.TauSigma:F2}  r {p.Rate:E3}  A {p.Amplitude:F3}  delay {p.Delay:F1}  χ²ν {p.ReducedChiSquare:F2}  fixed {p.TauFixed}");
        Assert.True(prep.Evidence.Detected, prep.Evidence.Summary);
        Assert.Equal("trailing", prep.Evidence.Side);
        Assert.InRange(prep.Evidence.TauSamples, 0.97 * tau, 1.03 * tau);
        Assert.InRange(prep.Evidence.TauFieldS!.Value, 0.97 * tau * dt, 1.03 * tau * dt);
        Assert.InRange(prep.Evidence.SweepRateHzPerS!.Value, 0.95 * rate / (dt * dt), 1.05 * rate / (dt * dt));
        Assert.InRange(prep.Evidence.Dynamics, 0.9 * RingdownModel.Dynamics(tau, rate), 1.1 * RingdownModel.Dynamics(tau, rate));

        // one fitted peak per resonance, at the crossing (the maxima lag it by several samples)
        Assert.Equal(truth.Length, prep.Peaks.Count);
        for (var k = 0; k < truth.Length; k++)
        {
            var p = prep.Peaks[k];
            Assert.True(Math.Abs(p.Crossing - truth[k].Item1) < 0.5, $"peak {k}: crossing {p.Crossing:F2} vs {truth[k].Item1}");
            Assert.InRange(p.Amplitude, 0.9 * truth[k].Item2, 1.1 * truth[k].Item2);
            Assert.True(p.Delay > 5, $"peak {k}: delay {p.Delay:F1} samples");
        }

        // the ringing is counted as peaks in the raw signal, not in the corrected one
        var raw = ResolvedPeaks.Find(sweep.X, sweep.Y, 0.04, 6);
        var corrected = ResolvedPeaks.Find(prep.Sweep.X, prep.Sweep.Y, 0.04, 6);
        output.WriteLine($"raw peaks {raw.Count}, corrected {corrected.Count}");
        Assert.True(raw.Count > truth.Length, $"raw: {raw.Count}");
        Assert.Equal(truth.Length, corrected.Count);
        for (var k = 0; k < truth.Length; k++) Assert.True(Math.Abs(corrected[k].Position - truth[k].Item1) < 0.7, $"corrected peak {k} at {corrected[k].Position:F2}");

        // finesse on an axis: with a stated FSR of 1 GHz per 1000 samples, F = π·FSR·τ_field
        var axis = new AxisPolynomial([0, 1e9 / (1000 * dt)], 0, 1, 0, sweep.X[^1]);
        var f = RingdownHandling.FinesseOnAxis(prep, axis, 1e9)!;
        Assert.InRange(f.Finesse, 0.97 * Math.PI * 1e9 * tau * dt, 1.03 * Math.PI * 1e9 * tau * dt);
    }

    [Fact]
    public void IntervalFromTheChirpWhenTheScanIsNotTime()
    {
        // SIMULATED: the same physics recorded against a ramp voltage (no time column): the sample interval comes from
        // the fitted chirp rate over the axis slope, so τ in seconds and the finesse still follow
        const double tau = 25, rate = 1.2e-3, dt = 2e-9;
        var timed = SimulatedSweep(3000, [(900.3, 0.8), (2100.6, 0.8)], tau, rate, 0.004, 5, dt);
        var ramp = timed with { X = Enumerable.Range(0, 3000).Select(i => 1 + 2e-3 * i).ToArray(), Scan = ScanCoordinate.Ramp };
        var prep = RingdownHandling.Prepare(ramp);
        Assert.True(prep.Evidence.Detected, prep.Evidence.Summary);
        Assert.Null(prep.Evidence.TauFieldS);
        // the true axis: rate·dt Hz per sample = r/dt Hz per sample; 2e-3 V per sample
        var hzPerVolt = rate / dt / 2e-3;
        var axis = new AxisPolynomial([0, hzPerVolt], 0, 1, 1, 7);
        var fsr = 2e9;
        var f = RingdownHandling.FinesseOnAxis(prep, axis, fsr)!;
        Assert.InRange(f.SampleIntervalS, 0.95 * dt, 1.05 * dt);
        Assert.InRange(f.TauFieldS, 0.95 * tau * dt, 1.05 * tau * dt);
        Assert.InRange(f.Finesse, 0.95 * Math.PI * fsr * tau * dt, 1.05 * Math.PI * fsr * tau * dt);
        Assert.True(f.StaticWidthFinesse < 0.6 * f.Finesse, $"static-width finesse {f.StaticWidthFinesse:F0} vs {f.Finesse:F0}");
    }

    [Fact]
    public void RecordRunningBackwardsIsFittedReversed()
    {
        // SIMULATED: the ringing before the peaks, as in a record stored last sample first
        const double tau = 25, rate = 1.2e-3;
        var forward = SimulatedSweep(3000, [(900.3, 0.8), (2100.6, 0.8)], tau, rate, 0.004, 7);
        var y = forward.Y.Reverse().ToArray();
        var prep = RingdownHandling.Prepare(forward with { Y = y });
        Assert.True(prep.Evidence.Detected, prep.Evidence.Summary);
        Assert.Equal("leading", prep.Evidence.Side);
        Assert.Equal(2, prep.Peaks.Count);
        Assert.True(Math.Abs(prep.Peaks[0].Crossing - (2999 - 2100.6)) < 0.5, $"{prep.Peaks[0].Crossing}");
        Assert.True(Math.Abs(prep.Peaks[1].Crossing - (2999 - 900.3)) < 0.5, $"{prep.Peaks[1].Crossing}");
    }

    [Theory]
    [InlineData(3.0, 1e-3)]   // SIMULATED slow sweep: π²rτ² ≈ 0.09, static FWHM ≈ 106 samples
    [InlineData(8.0, 1e-4)]   // π²rτ² ≈ 0.06, FWHM ≈ 400 samples
    [InlineData(2.0, 2e-2)]   // π²rτ² ≈ 0.8 but a narrow peak (8 samples): asymmetric, no ringing maxima
    public void SlowSweepIsNotRingdown(double tau, double rate)
    {
        var fwhm = RingdownModel.StaticFwhmSamples(tau, rate);
        var n = (int)(12 * fwhm) + 600;
        var sweep = SimulatedSweep(n, [(0.3 * n, 0.8), (0.7 * n, 0.6)], tau, rate, 0.004, 11);
        var prep = RingdownHandling.Prepare(sweep);
        output.WriteLine(prep.Evidence.Summary);
        Assert.False(prep.Evidence.Detected, prep.Evidence.Summary);
        Assert.Same(sweep, prep.Sweep);
        Assert.Empty(prep.Peaks);
    }

    [Fact]
    public void AiryCombIsNotRingdown()
    {
        // SIMULATED: an ordinary Airy comb with a second line at 30 % of the FSR (two modes, as on a gas laser), 8-bit
        var rng = new Random(2);
        const int n = 6000;
        var y = Enumerable.Range(0, n).Select(i => 0.02 + 0.8 * Airy.Transmission(i - 300.2, 1500, 60) + 0.5 * Airy.Transmission(i - 750.7, 1500, 60)
                                                   + 0.004 * OrderUnfold.Simulation.Simulator.Gaussian(rng))
            .Select(v => Math.Round(v * 255) / 255).ToArray();
        var sweep = new Sweep { Name = "airy", Source = "simulated", X = Enumerable.Range(0, n).Select(i => i * 1e-6).ToArray(), Y = y, Scan = ScanCoordinate.Time };
        var evidence = RingdownHandling.Detect(sweep);
        output.WriteLine(evidence.Summary);
        Assert.False(evidence.Detected, evidence.Summary);
    }

    // ------------------------------------------------------------------ field traces

    /// <summary>&lt;repo root&gt;/../shared/field-traces, found by walking up from the test assembly to the folder holding OrderUnfold.sln.</summary>
    internal static string FieldTraces() => FieldTraceSet.Root;

    public static TheoryData<string, string?, string?, string?, double?> StaticTraces => new()
    {
        // folder/file, x column, y column, scan (null: time), sample interval — as a user would state them from the README
        // (05 and 06 only their signal against the first column: the check needs no ramp)
        { "02_short_scope_two_modes/scope_ch1.csv", null, "2", null, 4e-6 },
        { "03_short_scope_single/scope_ch1.csv", null, "2", null, 4e-6 },
        { "07_two_cavity_multiline/cavA_cal.csv", "3", "2", "ramp", null },
        { "07_two_cavity_multiline/cavB_cal.csv", "3", "2", "ramp", null },
        { "07_two_cavity_multiline/cavA_meas.csv", "3", "2", "ramp", null },
        { "08_diode_comb_two_cavity/cav10_cal.csv", null, null, null, null },
        { "08_diode_comb_two_cavity/cav7p3_cal.csv", null, null, null, null },
        { "08_diode_comb_two_cavity/cav10_meas.csv", null, null, null, null },
        { "04_open_laser_four_modes/open_laser.csv", null, null, null, null },
        { "05_tall_half_family/ch1_pd.csv", null, null, null, null },
        { "06_plane_low_finesse/stepscan.csv", null, null, null, null },
    };

    [Theory]
    [MemberData(nameof(StaticTraces))]
    public void FieldTracesWithSlowSweepsShowNoRingdown(string file, string? x, string? y, string? scan, double? interval)
    {
        // shared/field-traces/NN/truth.json: these traces are slow sweeps (finesse 8–220, µs sampling): no ring-down
        var options = new SweepFileOptions
        {
            Path = Path.Combine(FieldTraces(), file),
            XColumn = x,
            YColumn = y,
            Scan = scan == "ramp" ? ScanCoordinate.Ramp : ScanCoordinate.Time,
            SampleIntervalS = interval,
        };
        foreach (var sweep in SweepReader.ReadSweeps(options))
        {
            var prep = RingdownHandling.Prepare(sweep);
            output.WriteLine($"{sweep.Name}: {prep.Evidence.Summary}");
            Assert.False(prep.Evidence.Detected, $"{sweep.Name}: {prep.Evidence.Summary}");
            Assert.Same(sweep, prep.Sweep);
        }
    }

    [Fact]
    public void FieldTrace01RingdownGivesTheFinesseAndTheCrossings()
    {
        var folder = Path.Combine(FieldTraces(), "01_ringdown_confocal");
        using var truthDoc = JsonDocument.Parse(File.ReadAllText(Path.Combine(folder, "truth.json")));
        var cavity = truthDoc.RootElement.GetProperty("true").GetProperty("cavity");
        var tauTrue = cavity.GetProperty("tau_field_s").GetDouble();
        var finesseTrue = cavity.GetProperty("finesse").GetDouble();
        var fsr = cavity.GetProperty("fsr_Hz_c_over_2nL").GetDouble();
        var truePeaks = truthDoc.RootElement.GetProperty("true").GetProperty("peaks").EnumerateArray()
            .Select(p => (T: p.GetProperty("t_s").GetDouble(), Static: p.GetProperty("static_peak_V_above_offset").GetDouble(),
                Delay: p.GetProperty("dynamic_max_delay_s").GetDouble(), Rate: p.GetProperty("sweep_rate_Hz_per_s").GetDouble()))
            .ToList();

        // the raw file, time as the scan coordinate and the recorded ramp to split the triangle (columns time,pd,ramp)
        var sweeps = SweepReader.ReadSweeps(new SweepFileOptions
        {
            Path = Path.Combine(folder, "ringdown_780nm.csv"),
            XColumn = "time",
            YColumn = "pd",
            RampColumn = "ramp",
            Scan = ScanCoordinate.Time,
        });
        Assert.True(sweeps.Count >= 4);
        var matched = 0;
        var preparations = RingdownHandling.PrepareAll(sweeps);
        foreach (var prep0 in preparations)
        {
            var prep = prep0;
            var sweep = sweeps[preparations.ToList().IndexOf(prep0)];
            output.WriteLine($"{sweep.Name}: {prep.Evidence.Summary}");
            foreach (var c in prep.Evidence.Checks) output.WriteLine($"  top {c.Top}: spacings {string.Join(",", c.LobeSpacings)}");
            foreach (var w in prep.Warnings) output.WriteLine("  " + w);
            Assert.True(prep.Evidence.Detected, $"{sweep.Name}: {prep.Evidence.Summary}");
            Assert.Equal("trailing", prep.Evidence.Side);

            // shared/field-traces/01_ringdown_confocal/truth.json: tau_field_s = 62.3 ns (checked within 5 %, this test's
            // requirement); finesse 587 ± 15 % (tolerances.finesse_rel) with F = π·FSR·τ_field and FSR = c/2nL from the same file
            Assert.InRange(prep.Evidence.TauFieldS!.Value, 0.95 * tauTrue, 1.05 * tauTrue);
            var finesse = Math.PI * fsr * prep.Evidence.TauFieldS.Value;
            Assert.InRange(finesse, 0.85 * finesseTrue, 1.15 * finesseTrue);
            // truth.json sweep_rate_over_linewidth_squared = 10.1 (the rate varies 2.3e14–3.0e14 Hz/s along the sweeps)
            Assert.InRange(prep.Evidence.Dynamics, 6, 15);

            // every true peak inside this sweep with a clear height: one fitted crossing within 4 ns (2 samples) of the
            // true resonance crossing (truth.json peaks[].t_s), i.e. well before the delayed maximum (dynamic_max_delay_s ≈ 41 ns)
            var t0 = Math.Min(sweep.X[0], sweep.X[^1]);
            var t1 = Math.Max(sweep.X[0], sweep.X[^1]);
            foreach (var tp in truePeaks.Where(p => p.T > t0 + 2e-7 && p.T < t1 - 4e-7 && p.Static <= 0.25))
            {
                var near = prep.Crossings.MinBy(c => Math.Abs(c.X - tp.T));
                output.WriteLine($"  weak: true {tp.T * 1e6:F4} µs (static {tp.Static:F3} V)  fitted {near?.X * 1e6:F4} µs (A {near?.Height:F3})  Δ {(near?.X - tp.T) * 1e9:F2} ns");
                // the weak transverse peaks (N=2: 10 %, N=3: 6 % of TEM00; truth.json true.peaks[].static_peak_V_above_offset):
                // crossing within 5 ns (2.5 samples), static height within 15 % (this test's requirement)
                Assert.NotNull(near);
                Assert.True(Math.Abs(near!.X - tp.T) < 5e-9, $"{sweep.Name}: weak crossing at {tp.T:E6} s fitted at {near.X:E6} s");
                Assert.InRange(near.Height, 0.85 * tp.Static, 1.15 * tp.Static);
            }

            foreach (var tp in truePeaks.Where(p => p.T > t0 + 2e-7 && p.T < t1 - 4e-7 && p.Static > 0.25))
            {
                var near = prep.Crossings.MinBy(c => Math.Abs(c.X - tp.T));
                Assert.NotNull(near);
                output.WriteLine($"  true {tp.T * 1e6:F4} µs  fitted {near!.X * 1e6:F4} µs  Δ {(near.X - tp.T) * 1e9:F2} ns  (max lags {tp.Delay * 1e9:F1} ns)");
                Assert.True(Math.Abs(near.X - tp.T) < 4e-9, $"{sweep.Name}: crossing at {tp.T:E6} s fitted at {near.X:E6} s");
                // the static height (what a slow sweep would show; the ringing top is only about 0.41 of it)
                Assert.InRange(near.Height, 0.9 * tp.Static, 1.1 * tp.Static);
                matched++;
            }

            // no ringing lobe was fitted as a peak: every fitted crossing is a true resonance (truth.json true.peaks[].t_s)
            foreach (var c in prep.Crossings)
                Assert.True(truePeaks.Any(p => Math.Abs(p.T - c.X) < 5e-9), $"{sweep.Name}: fitted crossing at {c.X:E6} s is no true resonance");

            // the ringing is gone: the corrected sweep has no more peaks than true resonances in it
            var raw = ResolvedPeaks.Find(sweep.X, sweep.Y, 0.04, 6);
            var corrected = ResolvedPeaks.Find(prep.Sweep.X, prep.Sweep.Y, 0.04, 6);
            var present = truePeaks.Count(p => p.T > t0 && p.T < t1);
            output.WriteLine($"  peaks found: raw {raw.Count}, corrected {corrected.Count}, true resonances {present}");
            Assert.True(corrected.Count <= present, $"{sweep.Name}: {corrected.Count} peaks after correction, {present} true resonances");
        }

        Assert.True(matched >= 8, $"only {matched} true crossings checked");
    }

    [Fact]
    public void FieldTrace01OnTheRampAxisGivesTheFinesseFromTheChirp()
    {
        // the user's setup: the ramp channel is the scan coordinate, no time column is read; the sample interval follows
        // from the fitted chirp over the axis slope. The axis here is the true one, x(V) per ramp direction from
        // shared/field-traces/01_ringdown_confocal/truth.json (true.axis.segments[].x_of_ramp_V_coeffs_c0_c1_c2_c3, x in FSR = c/2nL).
        var folder = Path.Combine(FieldTraces(), "01_ringdown_confocal");
        using var truthDoc = JsonDocument.Parse(File.ReadAllText(Path.Combine(folder, "truth.json")));
        var t = truthDoc.RootElement.GetProperty("true");
        var fsr = t.GetProperty("cavity").GetProperty("fsr_Hz_c_over_2nL").GetDouble();
        var finesseTrue = t.GetProperty("cavity").GetProperty("finesse").GetDouble();
        var tauTrue = t.GetProperty("cavity").GetProperty("tau_field_s").GetDouble();
        double[] Coefficients(string direction) => t.GetProperty("axis").GetProperty("segments").EnumerateArray()
            .First(e => e.GetProperty("direction").GetString() == direction)
            .GetProperty("x_of_ramp_V_coeffs_c0_c1_c2_c3").EnumerateArray().Select(v => v.GetDouble() * fsr).ToArray();

        var sweeps = SweepReader.ReadSweeps(new SweepFileOptions
        {
            Path = Path.Combine(folder, "ringdown_780nm.csv"), XColumn = "ramp", YColumn = "pd", Scan = ScanCoordinate.Ramp,
        });
        var preparations = RingdownHandling.PrepareAll(sweeps);
        var checkedHalves = 0;
        foreach (var prep in preparations.Where(p => p.Peaks.Count(f => !f.TauFixed) >= 2))
        {
            var direction = prep.Sweep.Direction == RampDirection.Up ? "up" : "down";
            var axis = new AxisPolynomial(Coefficients(direction), 0, 1, 0, 11);
            var f = RingdownHandling.FinesseOnAxis(prep, axis, fsr)!;
            output.WriteLine($"{prep.Sweep.Name}: F = {f.Finesse:F1} ± {f.Sigma:F1}, τ = {f.TauFieldS * 1e9:F2} ns, dt = {f.SampleIntervalS * 1e9:F3} ns, static-width F = {f.StaticWidthFinesse:F0}, rate {f.SweepRateHzPerS:E3} Hz/s");
            // truth.json: finesse 587 ± 15 % (tolerances.finesse_rel); files[0].sample_interval_s = 2 ns; tau_field_s 62.3 ns
            Assert.InRange(f.Finesse, 0.85 * finesseTrue, 1.15 * finesseTrue);
            Assert.InRange(f.SampleIntervalS, 0.95 * 2e-9, 1.05 * 2e-9);
            Assert.InRange(f.TauFieldS, 0.9 * tauTrue, 1.1 * tauTrue);
            // truth.json naive_static_fwhm_finesse_of_ringdown_peaks = 197: the static reading is far lower
            Assert.InRange(f.StaticWidthFinesse, 0.25 * finesseTrue, 0.5 * finesseTrue);
            checkedHalves++;
        }

        Assert.True(checkedHalves >= 4, $"{checkedHalves} ramp halves checked");
    }

    [Fact]
    public void AnnotatePutsTheDecayTimeFinesseIntoTheCalibration()
    {
        // SIMULATED ringing sweep (time scan, 2 ns) and its true axis: the sweep rate r/dt² Hz/s (x is time)
        const double tau = 25, rate = 1.2e-3, dt = 2e-9;
        var sweep = SimulatedSweep(3000, [(900.3, 0.8), (2100.6, 0.8)], tau, rate, 0.004, 13, dt);
        var prep = RingdownHandling.Prepare(sweep);
        var axis = new AxisPolynomial([0, rate / (dt * dt)], 0, 1, 0, sweep.X[^1]);
        var calibration = new AxisCalibration("cav", RampDirection.Single, sweep.Name, "self-calibration", axis, [], [], [], 0, 123, 5, []);
        var annotated = RingdownHandling.Annotate(calibration, prep, 1e9);
        var expected = Math.PI * 1e9 * tau * dt; // F = π·FSR·τ_field
        Assert.InRange(annotated.Finesse!.Value, 0.97 * expected, 1.03 * expected);
        Assert.True(annotated.FinesseSigma < 0.03 * expected);
        var note = Assert.Single(annotated.Warnings, w => w.Contains("decay time", StringComparison.Ordinal));
        Assert.Contains("would give only about", note, StringComparison.Ordinal);
        Assert.Contains("ring-down corrected", annotated.Method, StringComparison.Ordinal);

        Assert.DoesNotContain(annotated.Warnings, w => w.Contains("disagrees", StringComparison.Ordinal));

        // an axis at twice its true scale (every peak taken for the next FSR when only every second one is): the chirp
        // implies half the recorded sample interval, and the note says so
        var doubled = calibration with { Axis = new AxisPolynomial([0, 2 * rate / (dt * dt)], 0, 1, 0, sweep.X[^1]) };
        var wrong = RingdownHandling.Annotate(doubled, prep, 1e9);
        Assert.Contains(wrong.Warnings, w => w.Contains("disagrees", StringComparison.Ordinal) && w.Contains("×0.50", StringComparison.Ordinal));

        // without ring-down the calibration is returned as it was
        var slow = SimulatedSweep(3000, [(900.3, 0.8)], 3, 1e-3, 0.004, 14, dt);
        Assert.Same(calibration, RingdownHandling.Annotate(calibration, RingdownHandling.Prepare(slow), 1e9));
    }
}
