using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.SelfCalibration;

/// <summary>
/// Deciding the period from the whole peak pattern and recognising the cavity's transverse families. Every sweep here
/// is SIMULATED in the test: a single-frequency line through a cavity whose families sit at fixed offsets, on a
/// non-linear piezo axis, with noise and 8-bit quantisation.
/// </summary>
public sealed class PeriodDecisionTests(ITestOutputHelper output)
{
    /// <summary>A simulated single-line sweep: TEM00 every period plus families at apparent offsets (fractions of the
    /// period after each TEM00 peak) with relative heights; u(x) in periods is quadratic in x (10 % slope change).</summary>
    private static Sweep Simulated(double spanPeriods, double finesse, (double Apparent, double Height)[] families, int samples = 8000, int seed = 1,
        double start = 0.15)
    {
        var rng = new Random(seed);
        var x = new double[samples];
        var y = new double[samples];
        var f = Airy.CoefficientOfFinesse(finesse);
        double T(double d)
        {
            var s = Math.Sin(Math.PI * d);
            return 1 / (1 + f * s * s);
        }

        for (var i = 0; i < samples; i++)
        {
            var t = (double)i / (samples - 1);
            x[i] = i * 2e-6;
            var u = start + spanPeriods * (t + 0.05 * t * t) / 1.05;
            var v = T(u);
            foreach (var (a, h) in families) v += h * T(u - a);
            // detector noise, then an 8-bit scope over −0.05…2.5
            v = 0.5 * v + 0.004 * Gaussian(rng);
            var lsb = 2.55 / 256;
            y[i] = Math.Round((v + 0.05) / lsb) * lsb - 0.05;
        }

        return new Sweep { Name = "simulated.csv", Source = "simulated.csv", X = x, Y = y, Scan = ScanCoordinate.Time };
    }

    private static double Gaussian(Random r) => Math.Sqrt(-2 * Math.Log(1 - r.NextDouble())) * Math.Cos(2 * Math.PI * r.NextDouble());

    /// <summary>Periods the calibrated axis puts between the TEM00 crossings of the simulation (u = k), for every whole k inside the axis.</summary>
    private static List<double> SpacingsInPeriods(AxisCalibration c, int samples, double spanPeriods, double periodHz, double start = 0.15)
    {
        double XOf(double u)
        {
            // invert u(t) = start + span (t + 0.05 t²)/1.05 for t, then x = t (samples − 1) · 2 µs
            var a = 0.05;
            var rhs = (u - start) * 1.05 / spanPeriods;
            var t = (-1 + Math.Sqrt(1 + 4 * a * rhs)) / (2 * a);
            return t * (samples - 1) * 2e-6;
        }

        var list = new List<double>();
        for (var k = 1; k < start + spanPeriods; k++)
        {
            var xa = XOf(k);
            var xb = XOf(k + 1);
            if (xa < c.Axis.XMin || xb > c.Axis.XMax) continue;
            list.Add(Math.Abs(c.Axis.Evaluate(xb) - c.Axis.Evaluate(xa)) / periodHz);
        }

        return list;
    }

    [Fact]
    public void Gouy_offsets_follow_the_two_mirror_formula()
    {
        // Siegman, Lasers (1986), ch. 19: o_N = N·arccos(±√(g1 g2))/π with g = 1 − L/R; values evaluated from the formula by hand
        Assert.Equal(0.5, GouyPhase.OffsetFsr(1, 0.05, 0.05, 0.05), 12); // confocal, g = 0
        Assert.Equal(0.0, GouyPhase.OffsetFsr(1, 0.05, double.PositiveInfinity, double.PositiveInfinity), 12); // planar, g = 1
        Assert.Equal(0.531884, GouyPhase.OffsetFsr(1, 0.055, 0.05, 0.05), 5); // g = −0.1: arccos(−0.1)/π
        Assert.Equal(0.063768, GouyPhase.OffsetFsr(2, 0.055, 0.05, 0.05), 5); // 2 × 0.531884 mod 1
        Assert.Equal(0.468116, new CavityModeFamily(1, 0.531884, 1, "x").ApparentOffsetFsr, 6);
        Assert.True(double.IsNaN(GouyPhase.OffsetFsr(1, 0.11, 0.05, 0.05))); // g = −1.2: g1 g2 > 1, not a stable cavity
    }

    [Fact]
    public void The_response_of_an_instrument_with_a_family_has_the_family_peak_at_its_offset()
    {
        var inst = new Instrument("c", 2e9, 100) { Families = [new CavityModeFamily(1, 0.53, 1.8, "test")] };
        Assert.Equal(1 + 1.8 * Airy.Transmission(-0.53 * 2e9, 2e9, 100), inst.Response(0), 12);
        Assert.Equal(1.8 + Airy.Transmission(0.53 * 2e9, 2e9, 100), inst.Response(0.53 * 2e9), 12);
        Assert.Equal(inst.Response(0.1e9), inst.Response(2.1e9), 9); // still periodic in the FSR
    }

    [Fact]
    public void Score_tests_the_half_period_against_the_missing_repeats()
    {
        // simulated peak lists on a linear axis (x in periods): TEM00 at whole numbers, a taller family at 0.468
        var peaks = new List<PeriodDecider.PatternPeak>();
        for (var k = 0; k < 4; k++)
        {
            peaks.Add(new(k + 0.1, 1.0, 0.01));
            peaks.Add(new(k + 0.568, 1.85, 0.01));
        }

        var one = PeriodDecider.Score("chosen", 1, peaks, x => x, 0, 4, 0.005);
        var half = PeriodDecider.Score("half", 0.5, peaks, x => 2 * x, 0, 8, 0.005);
        Assert.True(one.Consistent);
        Assert.False(half.Consistent);
        // a degenerate (exactly confocal) odd family of nearly equal height: the half period explains everything
        var degenerate = Enumerable.Range(0, 8).Select(k => new PeriodDecider.PatternPeak(0.1 + 0.5 * k, k % 2 == 0 ? 1.0 : 0.92, 0.01)).ToList();
        Assert.True(PeriodDecider.Score("half", 0.5, degenerate, x => 2 * x, 0, 8, 0.005).Consistent);
    }

    [Fact]
    public void A_family_taller_than_TEM00_near_half_the_FSR_does_not_halve_the_period()
    {
        // simulated: the failure (a family 1.6× TEM00 at 0.455 FSR) with the ladder N = 2, 3 beside it; no radii stated
        var fams = new[] { (0.455, 1.6), (0.910, 0.2), (0.365, 0.25) };
        var sweep = Simulated(4.2, 120, fams);
        var inst = Instrument.FromLength("cav", 0.057, CavityGeometry.Planar, 40); // finesse stated 3× too low
        var r = SelfCalibrator.Calibrate(sweep, inst);
        var c = r.Calibration;
        var d = c.PeriodDecision!;
        output.WriteLine(d.Summary);
        output.WriteLine(d.Fundamental);
        foreach (var f in d.Families) output.WriteLine($"N={f.N} apparent {f.ApparentOffsetFsr:F4} height {f.RelativeHeight:F2}");
        var spacings = SpacingsInPeriods(c, sweep.Count, 4.2, inst.FsrHz);
        output.WriteLine("spacings " + string.Join(", ", spacings.Select(v => v.ToString("F4"))));
        Assert.NotEmpty(spacings);
        Assert.All(spacings, s => Assert.InRange(s, 0.99, 1.01)); // the true period, not its half
        Assert.Contains(d.Candidates, x => x.Label == "half" && !x.Consistent);
        var n1 = Assert.Single(d.Families, f => f.N == 1);
        Assert.InRange(n1.ApparentOffsetFsr, 0.450, 0.460);
        Assert.InRange(n1.RelativeHeight, 1.6 * 0.85, 1.6 * 1.15);
        Assert.Contains(d.Families, f => f.N == 2 && Math.Abs(f.ApparentOffsetFsr - 0.910) < 0.005);
        // the finesse is measured, not the stated 40
        Assert.NotNull(c.Finesse);
        Assert.InRange(c.Finesse!.Value, 120 * 0.85, 120 * 1.15);
    }

    [Fact]
    public void Mirror_radii_identify_the_families_and_the_offsets_are_measured()
    {
        // simulated: L = 55 mm, R = 50 mm (apparent offsets 0.4681, 0.9362, 0.4043); the radii are stated 2 % off (nominal)
        var fams = new[] { (0.4681, 1.85), (0.9362, 0.22), (0.4043, 0.3) };
        var sweep = Simulated(2.6, 142, fams, samples: 6000, seed: 4);
        var inst = Instrument.FromLength("cav", 0.055, CavityGeometry.Planar, 150) with { MirrorRadiiM = (0.051, 0.051) };
        var d = SelfCalibrator.Calibrate(sweep, inst).Calibration.PeriodDecision!;
        output.WriteLine(d.Summary);
        foreach (var f in d.Families) output.WriteLine($"N={f.N} apparent {f.ApparentOffsetFsr:F4} height {f.RelativeHeight:F2} ({f.Basis})");
        var n1 = Assert.Single(d.Families, f => f.N == 1);
        Assert.InRange(n1.ApparentOffsetFsr, 0.4681 - 0.005, 0.4681 + 0.005); // measured, not the 0.4757 the nominal radii predict
        Assert.Contains("mirror radii", n1.Basis);
        Assert.Equal(3, d.Families.Count);
    }

    [Fact]
    public void A_stated_confocal_FSR_is_doubled_when_the_odd_family_is_resolved_from_half()
    {
        // simulated: TEM00 every period, odd family 35 % at 0.512 (a cavity a few % off confocal); stated as confocal (c/4L)
        var fams = new[] { (0.512, 0.35) };
        var sweep = Simulated(3.3, 400, fams, samples: 12000, seed: 7);
        var inst = Instrument.FromLength("cav", 0.05, CavityGeometry.Confocal, 600);
        var c = SelfCalibrator.Calibrate(sweep, inst).Calibration;
        var d = c.PeriodDecision!;
        output.WriteLine(d.Summary);
        Assert.Equal(2 * inst.FsrHz, d.PeriodHz, 3);
        Assert.Contains("not exactly confocal", d.Basis);
        // the axis stays in units of the stated period it was fitted at; the settlement converts it to the decided FSR
        Assert.Equal(inst.FsrHz, c.BuiltAtFsrHz);
        Assert.Equal(d.PeriodHz, c.DecidedFsrHz);
        var spacings = SpacingsInPeriods(c.AtFsr(d.PeriodHz, inst.FsrHz), sweep.Count, 3.3, 2 * inst.FsrHz);
        Assert.NotEmpty(spacings);
        Assert.All(spacings, s => Assert.InRange(s, 0.99, 1.01));
        var odd = Assert.Single(d.Families, f => f.N == 1);
        Assert.InRange(odd.ApparentOffsetFsr, 0.508, 0.516);
    }

    [Fact]
    public void A_degenerate_confocal_odd_family_makes_the_peak_spacing_the_period()
    {
        // simulated: odd family exactly at 0.5, 8 % lower (a confocal cavity, partly mode-matched): the period is c/4L
        var fams = new[] { (0.5, 0.92) };
        var sweep = Simulated(3.2, 150, fams, samples: 10000, seed: 9);
        var inst = Instrument.FromLength("cav", 0.05, CavityGeometry.Confocal, 150);
        var c = SelfCalibrator.Calibrate(sweep, inst).Calibration;
        var d = c.PeriodDecision!;
        output.WriteLine(d.Summary);
        Assert.Equal(inst.FsrHz, d.PeriodHz, 3);
        Assert.Empty(d.Families);
        // the simulated period holds two peaks: the axis puts each simulated period at two FSRs
        var spacings = SpacingsInPeriods(c, sweep.Count, 3.2, 2 * inst.FsrHz);
        Assert.All(spacings, s => Assert.InRange(s, 0.99, 1.01));
    }

    [Fact]
    public void A_sweep_of_little_more_than_one_FSR_is_not_refused_for_a_wrong_stated_finesse()
    {
        // simulated: two peaks 1.15 periods apart, finesse 30, stated 300 (10× off)
        var sweep = Simulated(1.15, 30, [], samples: 600, seed: 2, start: 0.92);
        var inst = new Instrument("sfpi", 2e9, 300, CavityGeometry.Confocal);
        var c = SelfCalibrator.Calibrate(sweep, inst).Calibration;
        Assert.NotNull(c.Finesse);
        Assert.InRange(c.Finesse!.Value, 30 * 0.8, 30 * 1.2);
    }

    [Fact]
    public void Calibration_files_keep_the_families_and_whether_the_finesse_was_measured()
    {
        var inst = Instrument.FromLength("cav", 0.055, CavityGeometry.Planar, 142) with
        {
            Families = [new CavityModeFamily(1, 0.5319, 1.85, "measured")],
            FinesseMeasured = false,
        };
        var path = Path.Combine(Path.GetTempPath(), $"ou-cal-{Guid.NewGuid():N}.json");
        try
        {
            CalibrationFile.Write(path, new CalibrationSet([inst], [], "test"));
            var back = CalibrationFile.Read(path).Instruments.Single();
            var f = Assert.Single(back.Families);
            Assert.Equal(1, f.N);
            Assert.Equal(0.5319, f.GouyOffsetFsr, 12);
            Assert.Equal(1.85, f.RelativeHeight, 12);
            Assert.False(back.FinesseMeasured);
        }
        finally
        {
            File.Delete(path);
        }
    }
}
