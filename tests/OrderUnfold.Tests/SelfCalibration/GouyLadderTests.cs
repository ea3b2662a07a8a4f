using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.SelfCalibration;

/// <summary>
/// Transverse families on a Gouy ladder (family N at N·o₁ of an FSR, Siegman, <i>Lasers</i>, 1986, ch. 19) as part of the
/// self-calibration: weak families at the ladder's rungs, and the axis refitted to every peak of the line and its families.
/// Every sweep here is SIMULATED in the test: one line through a near-confocal cavity swept over 2.2 FSR by a piezo whose
/// response is cubic, the case where four repeat pairs clustered at two places along the sweep cannot pin the axis.
/// </summary>
public sealed class GouyLadderTests(ITestOutputHelper output)
{
    private const double Finesse = 400;
    private const double Span = 2.2;
    private const double Start = 0.3;

    /// <summary>u(t) in FSRs over t ∈ [0, 1]: cubic, 27 % slope change.</summary>
    private static double U(double t) => Start + Span * (t + 0.06 * t * t + 0.05 * t * t * t) / 1.11;

    /// <summary>g = 0.06 for both mirrors: o₁ = arccos(0.06)/π, so the apparent offsets are (−N·o₁ mod 1).</summary>
    private static double Apparent(int n) => CavityModeFamily.Frac(-GouyPhase.OffsetFsr(n, 0.047, 0.05, 0.05));

    private static Sweep Simulated((double Apparent, double Height)[] families, int samples = 16000, int seed = 3)
    {
        var rng = new Random(seed);
        var x = new double[samples];
        var y = new double[samples];
        var coefficient = Airy.CoefficientOfFinesse(Finesse);
        double T(double d)
        {
            var s = Math.Sin(Math.PI * d);
            return 1 / (1 + coefficient * s * s);
        }

        for (var i = 0; i < samples; i++)
        {
            var t = (double)i / (samples - 1);
            x[i] = t;
            var u = U(t);
            var v = T(u);
            foreach (var (a, h) in families) v += h * T(u - a);
            y[i] = v + 0.003 * Math.Sqrt(-2 * Math.Log(1 - rng.NextDouble())) * Math.Cos(2 * Math.PI * rng.NextDouble());
        }

        return new Sweep { Name = "simulated.csv", Source = "simulated.csv", X = x, Y = y, Scan = ScanCoordinate.Time };
    }

    /// <summary>RMS of the axis error in FSRs over its calibrated range (the constant removed).</summary>
    private static double AxisErrorFsr(AxisCalibration c, double fsrHz)
    {
        var errors = new List<double>();
        for (var k = 0; k <= 400; k++)
        {
            var t = c.Axis.XMin + (c.Axis.XMax - c.Axis.XMin) * k / 400;
            errors.Add((c.Axis.Evaluate(t) - c.Axis.Evaluate(c.Axis.XMin)) / fsrHz - (U(t) - U(c.Axis.XMin)));
        }

        var mean = errors.Average();
        return Math.Sqrt(errors.Average(e => (e - mean) * (e - mean)));
    }

    private static (double, double)[] Ladder => [(Apparent(1), 0.4), (Apparent(2), 0.12), (Apparent(3), 0.07)];

    [Theory]
    [InlineData(0.050, 0.052)] // near-confocal, g = +0.038
    [InlineData(0.055, 0.050)] // g = −0.1
    [InlineData(0.030, 0.200)] // g = +0.85
    public void The_equal_mirror_radius_inverts_the_Gouy_offset(double lengthM, double radiusM)
    {
        // Siegman, Lasers (1986), ch. 19: o₁ = arccos(±√(g₁g₂))/π, g = 1 − L/R; the inverse for g₁ = g₂ must return R
        Assert.Equal(radiusM, GouyPhase.EqualMirrorRadius(GouyPhase.OffsetFsr(1, lengthM, radiusM, radiusM), lengthM), 9);
        Assert.True(double.IsPositiveInfinity(GouyPhase.EqualMirrorRadius(1e-12, lengthM)) || GouyPhase.EqualMirrorRadius(1e-12, lengthM) > 1e6);
        Assert.True(double.IsNaN(GouyPhase.EqualMirrorRadius(1.2, lengthM)));
    }

    [Fact]
    public void A_weak_family_at_a_rung_of_the_ladder_is_found_and_every_family_is_measured()
    {
        var inst = new Instrument("cav", 3e9, 600);
        var c = SelfCalibrator.Calibrate(Simulated(Ladder), inst).Calibration;
        var d = c.PeriodDecision!;
        output.WriteLine(c.Method);
        foreach (var f in d.Families) output.WriteLine($"N={f.N} apparent {f.ApparentOffsetFsr:F4} (simulated {Apparent(f.N):F4}) height {f.RelativeHeight:F3}");
        // the simulated families (7 % is below the tenth of the tallest that groups the clear peaks)
        foreach (var (n, h) in new[] { (1, 0.4), (2, 0.12), (3, 0.07) })
        {
            var f = Assert.Single(d.Families, f => f.N == n);
            Assert.InRange(f.ApparentOffsetFsr, Apparent(n) - 0.001, Apparent(n) + 0.001);
            Assert.InRange(f.RelativeHeight, 0.85 * h, 1.15 * h);
        }
    }

    [Fact]
    public void The_ladder_pins_a_cubic_piezo_that_four_repeat_pairs_leave_free()
    {
        var inst = new Instrument("cav", 3e9, 600);
        var sweep = Simulated(Ladder);
        var ladder = SelfCalibrator.Calibrate(sweep, inst).Calibration;
        var pairs = SelfCalibrator.Calibrate(sweep, inst, new SelfCalibrationOptions { UseFamilyLadder = false }).Calibration;
        var linewidth = 1 / Finesse; // in FSRs
        var eLadder = AxisErrorFsr(ladder, inst.FsrHz) / linewidth;
        var ePairs = AxisErrorFsr(pairs, inst.FsrHz) / linewidth;
        output.WriteLine($"ladder: {ladder.Method}, degree {ladder.Axis.Degree}, axis error {eLadder:F3} linewidths RMS");
        output.WriteLine($"pairs:  {pairs.Method}, degree {pairs.Axis.Degree}, axis error {ePairs:F3} linewidths RMS");
        Assert.Contains("Gouy ladder", ladder.Method);
        Assert.DoesNotContain("Gouy ladder", pairs.Method);
        Assert.True(eLadder < 0.05, $"ladder axis error {eLadder:F3} linewidths");
        Assert.True(eLadder < 0.5 * ePairs, $"ladder {eLadder:F3} against pairs {ePairs:F3} linewidths");
    }

    [Fact]
    public void Families_off_the_ladder_leave_the_axis_to_the_repeat_pairs_with_a_warning()
    {
        // an astigmatic cavity: N = 2 sits 0.004 FSR (1.6 linewidths) off the rung 2·a₁ (simulated)
        var inst = new Instrument("cav", 3e9, 600);
        var families = new[] { (Apparent(1), 0.4), (Apparent(2) + 0.004, 0.12), (Apparent(3), 0.07) };
        var c = SelfCalibrator.Calibrate(Simulated(families), inst).Calibration;
        output.WriteLine(c.Method);
        foreach (var w in c.Warnings) output.WriteLine("warning: " + w);
        Assert.DoesNotContain("Gouy ladder", c.Method);
        Assert.Contains(c.Warnings, w => w.Contains("do not lie on one Gouy ladder", StringComparison.Ordinal));
    }
}
