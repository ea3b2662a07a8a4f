using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using OrderUnfold.Simulation;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.SelfCalibration;

/// <summary>Airy finesse fits, the averaged peak shape, and transverse-mode families. All sweeps here are simulated.</summary>
public sealed class FinesseAndTransverseModeTests(ITestOutputHelper output)
{
    private const double Fsr = 1.5e9;

    /// <summary>A single-frequency sweep over <paramref name="spanFsr"/> FSRs on a linear axis, with Gaussian noise and
    /// 8-bit quantisation, built from a transmission function of the detuning (simulated).</summary>
    private static (Sweep Sweep, AxisPolynomial Axis) Sweep(Func<double, double> transmission, double spanFsr = 6, int samples = 9000, double noise = 0.003, int seed = 1,
        string name = "simulated.csv")
    {
        var rng = new Random(seed);
        var x = Enumerable.Range(0, samples).Select(i => i * 1e-6).ToArray();
        var f = x.Select(v => v / x[^1] * spanFsr * Fsr).ToArray();
        var offset = 0.37 * Fsr;
        var y = f.Select(v => 0.02 + transmission(v - offset) + noise * Simulator.Gaussian(rng)).ToArray();
        var lsb = 1.2 / 255;
        y = y.Select(v => Math.Round(v / lsb) * lsb).ToArray();
        var axis = AxisPolynomial.Fit(x, f, 1);
        return (new Sweep { Name = name, Source = name, X = x, Y = y, Scan = ScanCoordinate.Time }, axis);
    }

    /// <summary>Airy function written with the mirror reflectance: T = (1 − R)² / (1 + R² − 2R cos δ), δ = 2πν/FSR
    /// (Hecht, <i>Optics</i>, 5th ed., §9.6.1, for lossless mirrors).</summary>
    private static double AiryR(double nu, double r) => (1 - r) * (1 - r) / (1 + r * r - 2 * r * Math.Cos(2 * Math.PI * nu / Fsr));

    [Theory]
    [InlineData(0.95)]
    [InlineData(0.98)]
    [InlineData(0.99)]
    public void Fitted_finesse_matches_the_reflectance_finesse_of_the_mirrors(double reflectance)
    {
        // reflectance finesse 𝓕 = π√R/(1 − R) (Hecht, Optics, 5th ed., §9.6.1): 61.2, 155.5, 312.6
        var expected = Math.PI * Math.Sqrt(reflectance) / (1 - reflectance);
        var (sweep, axis) = Sweep(nu => AiryR(nu, reflectance), samples: reflectance > 0.985 ? 20000 : 9000);
        var est = FinesseFit.FromSweep(sweep, axis, Fsr, finesseGuess: 100);
        Assert.NotNull(est);
        output.WriteLine($"R = {reflectance}: fitted {est!.Finesse:F2} ± {est.Sigma:F2} from {est.Peaks.Count} peaks, expected {expected:F2}; scatter χ² {est.ScatterChiSquare:F2}; Airy-shaped {est.Profile?.AiryShaped}");
        Assert.InRange(est.Finesse, expected * 0.99, expected * 1.01);                  // within 1 %
        Assert.InRange(Math.Abs(est.Finesse - expected), 0, 4 * est.Sigma + 0.002 * expected);
        Assert.True(est.Consistent);
        Assert.True(est.Profile!.AiryShaped);
        Assert.True(est.Peaks.Count >= 4, $"{est.Peaks.Count} peaks fitted");
    }

    [Fact]
    public void A_broadened_line_gives_the_finesse_of_the_convolved_profile()
    {
        // An Airy profile (R = 0.98) convolved numerically with a Lorentzian line of FWHM w. The Airy function is the
        // Fourier series Σ Rⁿ cos(nδ) of the round trips, and a Lorentzian multiplies the n-th term by exp(−nπw/FSR),
        // so the result is again an Airy function with R' = R·exp(−πw/FSR) (the Poisson kernel; Lorentzian widths add).
        const double r = 0.98;
        var lw = Fsr / Airy.ReflectanceFinesse(r);
        var w = lw; // the line is as wide as the instrument
        var half = w / 2;
        double Broadened(double nu)
        {
            // ∫ L(u) T(ν − u) du on a fine grid over ±60 half-widths (the tails beyond hold 1 % of the area, renormalised)
            double sum = 0, norm = 0;
            for (var k = -2400; k <= 2400; k++)
            {
                var u = k * half / 40;
                var l = 1 / (1 + u * u / (half * half));
                sum += l * AiryR(nu - u, r);
                norm += l;
            }

            return sum / norm;
        }

        var (sweep, axis) = Sweep(Broadened, spanFsr: 3, samples: 4500, seed: 2);
        var est = FinesseFit.FromSweep(sweep, axis, Fsr, finesseGuess: 155);
        Assert.NotNull(est);
        var rEff = r * Math.Exp(-Math.PI * w / Fsr);
        var expected = Math.PI * Math.Sqrt(rEff) / (1 - rEff);
        output.WriteLine($"instrument finesse {Fsr / lw:F1}, line width {w / 1e6:F2} MHz: fitted {est!.Finesse:F2} ± {est.Sigma:F2}, expected {expected:F2} (≈ FSR/(Δν_instrument + w) = {Fsr / (lw + w):F2})");
        Assert.InRange(est.Finesse, expected * 0.985, expected * 1.015);
        Assert.InRange(est.Finesse, 0.45 * 155.5, 0.55 * 155.5); // the apparent finesse halves
    }

    [Fact]
    public void A_peak_with_a_shoulder_is_reported_as_not_Airy_shaped()
    {
        // misaligned cavity: every peak has a weaker transverse mode 1.3 linewidths above it (simulated)
        const double r = 0.98;
        var lw = Fsr / Airy.ReflectanceFinesse(r);
        var (sweep, axis) = Sweep(nu => AiryR(nu, r) + 0.3 * AiryR(nu - 1.3 * lw, r), samples: 9000, seed: 3);
        var est = FinesseFit.FromSweep(sweep, axis, Fsr, finesseGuess: 155);
        Assert.NotNull(est);
        output.WriteLine($"fitted {est!.Finesse:F1}, profile RMS deviation {est.Profile!.RmsDeviation:P1}, odd part {est.Profile.OddRms:P1}");
        foreach (var wng in est.Warnings) output.WriteLine(wng);
        Assert.False(est.Profile.AiryShaped);
        Assert.Contains(est.Warnings, m => m.Contains("not Airy-shaped"));
        Assert.True(est.Profile.OddRms > 0.02);
    }

    [Fact]
    public void Half_FSR_transverse_family_of_a_misaligned_confocal_cavity_is_found_with_the_finesse_drop()
    {
        // confocal cavity, stated finesse 200; misaligned: the odd transverse family appears half an FSR from the
        // main peaks at 25 % height, and imperfect overlap of the transverse modes broadens the peaks (finesse ≈ 100)
        var inst = new Instrument("C", Fsr, 200, CavityGeometry.Confocal);
        const double r = 0.969; // reflectance finesse ≈ 100
        var (sweep, axis) = Sweep(nu => AiryR(nu, r) + 0.25 * AiryR(nu - Fsr / 2, r), spanFsr: 6, samples: 9000, seed: 4, name: "confocal.csv");
        var est = FinesseFit.FromSweep(sweep, axis, Fsr, inst.Finesse);
        var report = TransverseModes.Detect(sweep, axis, inst, Fsr, est?.Finesse);
        foreach (var w in report.Warnings) output.WriteLine(w);
        var family = Assert.Single(report.Families);
        Assert.True(family.HalfPeriod);
        Assert.InRange(family.RelativeHeight, 0.2, 0.3);
        Assert.True(family.Count >= 5);
        Assert.Contains(report.Warnings, w => w.Contains("odd transverse modes"));
        Assert.Contains(report.Warnings, w => w.Contains("below the stated 200"));
    }

    [Fact]
    public void Alternating_peak_heights_reveal_a_second_transverse_family_one_FSR_apart()
    {
        // confocal cavity with FSR = c/4L: even and odd families alternate, the odd one at 40 % (partly mode-matched)
        var inst = new Instrument("C", Fsr, 155, CavityGeometry.Confocal);
        const double r = 0.98;
        double T(double nu)
        {
            var order = (int)Math.Round(nu / Fsr);
            return AiryR(nu, r) * ((order & 1) == 0 ? 1.0 : 0.4);
        }

        var (sweep, axis) = Sweep(T, spanFsr: 6, samples: 9000, seed: 5, name: "alternating.csv");
        var report = TransverseModes.Detect(sweep, axis, inst, Fsr);
        foreach (var w in report.Warnings) output.WriteLine(w);
        Assert.Empty(report.Families);
        Assert.NotNull(report.AlternationRatio);
        Assert.InRange(report.AlternationRatio!.Value, 0.35, 0.45);
        Assert.Contains(report.Warnings, w => w.Contains("alternate in height"));

        // here every peak is one FSR: the check keeps the numbering (the finesse on it matches the stated one)
        var numbered = AxisCalibrator.FromCalibrationSweep(sweep, inst);
        var checkedAxis = OrderUnfold.Calibration.CalibrationSteps.DescribeCalibrationSweep(numbered, sweep, inst);
        foreach (var w in checkedAxis.Warnings) output.WriteLine(w);
        var mid = 0.5 * (axis.XMin + axis.XMax);
        Assert.InRange(checkedAxis.Axis.Derivative(mid) / axis.Derivative(mid), 0.999, 1.001);
        Assert.Equal("calibration sweep", checkedAxis.Method);
    }

    [Fact]
    public void A_clean_calibration_sweep_shows_no_transverse_modes()
    {
        var inst = new Instrument("P", Fsr, 155.5);
        var (sweep, axis) = Sweep(nu => AiryR(nu, 0.98), seed: 6);
        var report = TransverseModes.Detect(sweep, axis, inst, Fsr, 155.5);
        Assert.Empty(report.Families);
        Assert.Empty(report.Warnings);
    }

    [Fact]
    public void A_strong_half_FSR_family_does_not_double_the_calibration_axis()
    {
        // misaligned planar cavity: a transverse family half an FSR from the main peaks at 45 % height. Numbering
        // every peak as the next FSR gives an axis at twice the scale without any irregular spacing; the check refits the
        // axis to repeats one FSR apart and reports the family.
        var inst = new Instrument("P", Fsr, 155.5);
        var (sweep, truth) = Sweep(nu => AiryR(nu, 0.98) + 0.45 * AiryR(nu - Fsr / 2, 0.98), spanFsr: 6, samples: 9000, seed: 7, name: "misaligned.csv");
        var numbered = AxisCalibrator.FromCalibrationSweep(sweep, inst);
        var mid = 0.5 * (numbered.Axis.XMin + numbered.Axis.XMax);
        output.WriteLine($"numbering every peak: slope {numbered.Axis.Derivative(mid) / truth.Derivative(mid):F3} of the truth");
        Assert.InRange(numbered.Axis.Derivative(mid) / truth.Derivative(mid), 1.95, 2.05);
        var checkedAxis = OrderUnfold.Calibration.CalibrationSteps.DescribeCalibrationSweep(numbered, sweep, inst);
        foreach (var w in checkedAxis.Warnings) output.WriteLine(w);
        Assert.InRange(checkedAxis.Axis.Derivative(mid) / truth.Derivative(mid), 0.999, 1.001);
        Assert.Contains("extra peaks left out", checkedAxis.Method);
        var family = Assert.Single(checkedAxis.TransverseModes!.Families);
        Assert.True(family.HalfPeriod);
        Assert.InRange(checkedAxis.Finesse!.Value, 150, 161);
    }
}
