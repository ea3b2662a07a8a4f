using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;
using Xunit.Abstractions;
using static OrderUnfold.Tests.SelfCalibration.SelfCalibrationData;

namespace OrderUnfold.Tests.SelfCalibration;

/// <summary>Axis self-calibration from repeats one FSR apart, against the simulator's true scan. All data simulated.</summary>
public sealed class SelfCalibratorTests(ITestOutputHelper output)
{
    [Fact]
    public void Axis_of_a_nonlinear_piezo_matches_the_truth_to_a_small_fraction_of_a_linewidth_in_both_directions()
    {
        // 5 % quadratic and 2 % cubic piezo non-linearity, plus 3 % hysteresis on the down ramp; no calibration sweep
        var cav = Cavity("A", 0.1, finesse: 150, samples: 12000, spanFsr: 5);
        var spec = new SimulationSpec { Lines = FourLines(), Cavities = [cav], Seed = 3 };
        var record = Records(spec)[0];
        Assert.Equal(2, record.Sweeps.Count);
        foreach (var s in record.Sweeps)
        {
            var r = SelfCalibrator.Calibrate(s, cav.Instrument);
            var c = r.Calibration;
            var rms = AxisRmsHz(c.Axis, s, record.TrueScan(s));
            var lw = cav.Instrument.LinewidthHz;
            output.WriteLine($"{s.Name}: degree {c.Axis.Degree}, {c.PairsUsed} pairs ({c.PairsRejected} rejected), residual {c.ResidualRmsHz / 1e3:F1} kHz, " +
                             $"axis σ {c.AxisSigmaHz / 1e3:F1} kHz, true RMS error {rms / 1e3:F1} kHz = {rms / lw:F4} linewidths; finesse {c.Finesse:F1} ± {c.FinesseSigma:F1}");
            Assert.True(c.FromRepeats);
            Assert.Contains("self-calibration", c.Method);
            Assert.InRange(rms, 0, 0.1 * lw); // the requirement: better than a tenth of a linewidth RMS
            Assert.InRange(rms, 0, 0.02 * lw); // what it achieves here (measured ≈ 0.002 linewidths)
            Assert.InRange(c.Axis.Degree, 3, 5); // the simulated ramp is a cubic in time
            Assert.True(c.PairsUsed >= 12, $"only {c.PairsUsed} pairs");
            Assert.Equal(c.PairsUsed, c.PointCount);
            Assert.DoesNotContain(c.Warnings, w => w.Contains("residual") || w.Contains("uncertain"));
            // the finesse fitted to the isolated peaks on the self-calibrated axis
            Assert.NotNull(c.Finesse);
            Assert.InRange(c.Finesse!.Value, 150 * 0.97, 150 * 1.03);
        }
    }

    [Fact]
    public void Nine_mode_laser_with_similar_heights_is_not_mismatched()
    {
        // The pitfall: modes of similar height whose folded pattern nearly repeats within one FSR. Pairing each peak
        // with "a peak of similar height about one FSR later" confuses them; the window predicted by the axis does not.
        var cav = Cavity("A", 0.1, finesse: 150, samples: 12000, spanFsr: 5);
        var spec = new SimulationSpec { Lines = NineModes(), Cavities = [cav], Seed = 4 };
        var record = Records(spec)[0];
        var lw = cav.Instrument.LinewidthHz;
        foreach (var s in record.Sweeps)
        {
            var r = SelfCalibrator.Calibrate(s, cav.Instrument);
            var rms = AxisRmsHz(r.Calibration.Axis, s, record.TrueScan(s));
            output.WriteLine($"{s.Name}: {r.Peaks.Count} peaks, {r.Calibration.PairsUsed} pairs, initial period {r.InitialPeriodSamples:F0} samples, true RMS error {rms / lw:F4} linewidths");
            Assert.InRange(rms, 0, 0.1 * lw);
            Assert.True(r.Calibration.PairsUsed >= 20);
            // every pair joins peaks of nearly the same height: the same mode one FSR later
            Assert.All(r.Pairs.Where(p => p.Used && p.Origin == "repeat"), p => Assert.InRange(p.HeightB / p.HeightA, 0.85, 1.18));
        }
    }

    [Fact]
    public void A_two_peak_calibration_sweep_is_completed_by_the_repeats_of_the_source()
    {
        // The calibration sweep covers only 1.3 FSR (two peaks: a linear axis at best); fitted jointly with the
        // source's repeats the axis recovers the non-linearity.
        var inst = Instrument.FromLength("A", 0.1, CavityGeometry.Planar, 150);
        var full = new SimulatedCavity { Instrument = inst, SpanFsr = 5, Samples = 12000, Quadratic = 0.05, Cubic = 0.02 };
        var spec = new SimulationSpec { Lines = FourLines(), Cavities = [full], Seed = 9, Triangle = false };
        var rng = new Random(9);
        var src = Simulator.Trace(spec, full, false, rng);
        var cal = Simulator.Trace(spec, full, true, rng);
        var srcSweep = SimulatedSweeps.Halves(src, "A", false)[0];
        var calSweep = SimulatedSweeps.Halves(cal, "A cal", false)[0];
        // keep the first 40 % of the calibration record: 2 FSR, two or three peaks
        var cut = (int)(0.40 * calSweep.Count);
        calSweep = calSweep with { X = calSweep.X[..cut], Y = calSweep.Y[..cut] };
        var fromCal = AxisCalibrator.FromCalibrationSweep(calSweep, inst);
        Assert.InRange(fromCal.PointCount, 2, 3);
        // the two-peak axis extrapolated over the whole source sweep
        var dCal = srcSweep.X.Select((x, i) => fromCal.Axis.Evaluate(x) - src.TrueScanHz[i]).ToArray();
        var calOnly = Math.Sqrt(dCal.Average(v => (v - dCal.Average()) * (v - dCal.Average())));

        var jr = SelfCalibrator.Calibrate(srcSweep, inst, new SelfCalibrationOptions { Companion = fromCal });
        var joint = jr.Calibration;
        foreach (var d in jr.Degrees) output.WriteLine($"degree {d.Degree}: χ² {d.ChiSquare:G4}, PRESS {d.LeaveOneOut:G4}, monotone {d.Monotone}");
        var jointRms = AxisRmsHz(joint.Axis, srcSweep, src.TrueScanHz);
        output.WriteLine($"calibration sweep alone: {calOnly / 1e6:F1} MHz RMS over the source sweep; jointly: {jointRms / 1e3:F1} kHz ({joint.Method})");
        Assert.Contains("jointly", joint.Method);
        Assert.InRange(jointRms, 0, 0.1 * inst.LinewidthHz);
        Assert.True(calOnly > 10 * jointRms);
    }

    [Fact]
    public void Both_directions_are_calibrated_on_their_own_and_differ_by_the_hysteresis()
    {
        var cav = Cavity("A", 0.1, finesse: 150, samples: 10000, spanFsr: 5, hysteresis: 0.06);
        var record = Records(new SimulationSpec { Lines = FourLines(), Cavities = [cav], Seed = 12 })[0];
        var up = record.Sweeps.Single(s => s.Direction == RampDirection.Up);
        var down = record.Sweeps.Single(s => s.Direction == RampDirection.Down);
        var aUp = SelfCalibrator.Calibrate(up, cav.Instrument).Calibration;
        var aDown = SelfCalibrator.Calibrate(down, cav.Instrument).Calibration;
        // f rises with time on the up ramp and falls on the down ramp (the sweep convention)
        Assert.True(aUp.Axis.Derivative(0.5 * (aUp.Axis.XMin + aUp.Axis.XMax)) > 0);
        Assert.True(aDown.Axis.Derivative(0.5 * (aDown.Axis.XMin + aDown.Axis.XMax)) < 0);
        Assert.InRange(AxisRmsHz(aUp.Axis, up, record.TrueScan(up)), 0, 0.1 * cav.Instrument.LinewidthHz);
        Assert.InRange(AxisRmsHz(aDown.Axis, down, record.TrueScan(down)), 0, 0.1 * cav.Instrument.LinewidthHz);
        // using the up-ramp axis for the down ramp (mirrored in time) would be off by many linewidths
        var mirrored = down.X.Select(x => aUp.Axis.Evaluate(down.X[^1] - x)).ToArray();
        var truth = record.TrueScan(down);
        var d = mirrored.Zip(truth, (m, t) => m - t).ToArray();
        var mean = d.Average();
        var crossRms = Math.Sqrt(d.Average(v => (v - mean) * (v - mean)));
        output.WriteLine($"up axis applied to the down ramp: {crossRms / 1e6:F1} MHz RMS");
        Assert.True(crossRms > 2 * cav.Instrument.LinewidthHz);
    }

    [Fact]
    public void A_laser_that_hops_mid_sweep_is_reported()
    {
        // The source jumps by 230 MHz at the middle of the record: repeats stop matching across the jump.
        var cav = Cavity("A", 0.1, finesse: 150, samples: 8000, spanFsr: 6, quadratic: 0.03, cubic: 0.01);
        var before = new SimulationSpec { Lines = FourLines(), Cavities = [cav], Seed = 21, Triangle = false };
        var after = before with { Lines = FourLines().Select(l => l with { FrequencyHz = l.FrequencyHz + 0.23e9 }).ToArray() };
        var t1 = Simulator.Trace(before, cav, false, new Random(21));
        var t2 = Simulator.Trace(after, cav, false, new Random(21));
        var half = t1.Signal.Length / 2;
        var y = t1.Signal[..half].Concat(t2.Signal[half..]).ToArray();
        var sweep = new Sweep { Name = "hop.csv", Source = "hop.csv", X = t1.TimeS, Y = y, Scan = ScanCoordinate.Time };
        var r = SelfCalibrator.Calibrate(sweep, cav.Instrument);
        foreach (var w in r.Calibration.Warnings) output.WriteLine(w);
        Assert.Contains(r.Calibration.Warnings, w => w.Contains("changed during the sweep"));
    }

    [Fact]
    public void A_sweep_shorter_than_one_FSR_cannot_be_self_calibrated()
    {
        var cav = Cavity("A", 0.1, finesse: 150, samples: 3000, spanFsr: 0.8, quadratic: 0.03, cubic: 0.01);
        var spec = new SimulationSpec { Lines = FourLines(), Cavities = [cav], Seed = 5, Triangle = false };
        var sweep = SimulatedSweeps.Halves(Simulator.Trace(spec, cav, false, new Random(5)), "short.csv", false)[0];
        var e = Assert.Throws<InputException>(() => SelfCalibrator.Calibrate(sweep, cav.Instrument));
        output.WriteLine(e.Message);
        Assert.Contains("no repeats", e.Message);
        Assert.Contains("[[calibration]]", e.Message);
    }

    [Fact]
    public void A_sweep_without_peaks_or_repeats_is_refused_with_the_remedy()
    {
        var rng = new Random(1);
        var x = Enumerable.Range(0, 4000).Select(i => i * 1e-6).ToArray();
        var noise = new Sweep { Name = "dark.csv", Source = "dark.csv", X = x, Y = x.Select(_ => 0.01 * Simulator.Gaussian(rng)).ToArray() };
        var inst = Instrument.FromLength("A", 0.1, CavityGeometry.Planar, 150);
        var e1 = Assert.Throws<InputException>(() => SelfCalibrator.Calibrate(noise, inst));
        Assert.Contains("peak", e1.Message);

        // peaks that never repeat: widths and spacing random (a sweep of something that is not a stable source)
        var y = new double[x.Length];
        foreach (var (c, w, h) in new[] { (500, 9.0, 1.0), (1700, 7.0, 0.4), (2100, 12.0, 0.7), (3500, 8.0, 0.25) })
            for (var i = 0; i < y.Length; i++) y[i] += h / (1 + Math.Pow((i - c) / (0.5 * w), 2));
        var random = new Sweep { Name = "junk.csv", Source = "junk.csv", X = x, Y = y.Select(v => v + 0.002 * Simulator.Gaussian(rng)).ToArray() };
        var e2 = Assert.Throws<InputException>(() => SelfCalibrator.Calibrate(random, inst with { Finesse = 60 }));
        output.WriteLine(e2.Message);
        Assert.Contains("repeat", e2.Message);
    }

    [Fact]
    public void Too_few_pairs_for_a_requested_degree_is_an_error_and_auto_stays_within_the_constraints()
    {
        var cav = Cavity("A", 0.1, finesse: 150, samples: 4000, spanFsr: 1.7, quadratic: 0.03, cubic: 0.01);
        var spec = new SimulationSpec { Lines = [new SimulatedLine(0, 1.0), new SimulatedLine(0.5e9, 0.5)], Cavities = [cav], Seed = 6, Triangle = false };
        var sweep = SimulatedSweeps.Halves(Simulator.Trace(spec, cav, false, new Random(6)), "few.csv", false)[0];
        var auto = SelfCalibrator.Calibrate(sweep, cav.Instrument);
        output.WriteLine($"{auto.Calibration.PairsUsed} pairs, degree {auto.Calibration.Axis.Degree}");
        Assert.InRange(auto.Calibration.Axis.Degree, 1, Math.Max(1, auto.Calibration.PairsUsed - 2));
        var e = Assert.Throws<InputException>(() => SelfCalibrator.Calibrate(sweep, cav.Instrument, new SelfCalibrationOptions { Degree = 7 }));
        output.WriteLine(e.Message);
        Assert.Contains("too few for a degree-7 axis", e.Message);
    }

    [Fact]
    public void Overlapping_peaks_are_resolved_where_a_region_finder_merges_them()
    {
        // two Lorentzian peaks 3 widths apart on one record (simulated)
        var x = Enumerable.Range(0, 2000).Select(i => (double)i).ToArray();
        var y = x.Select(i => 1 / (1 + Math.Pow((i - 1000) / 5.0, 2)) + 0.6 / (1 + Math.Pow((i - 1030) / 5.0, 2))).ToArray();
        var merged = PeakFinder.Find(x, y, 0.05, 5);
        var resolved = ResolvedPeaks.Find(x, y, 0.05, 5);
        Assert.Single(merged);
        Assert.Equal(2, resolved.Count);
        Assert.InRange(resolved[0].X, 998.5, 1000.5);
        Assert.InRange(resolved[1].X, 1029, 1031.5);
    }
}
