using MathNet.Numerics;
using OrderUnfold.Instruments;
using Xunit;

namespace OrderUnfold.Tests.Instruments;

/// <summary>
/// Airy-function relations against textbook formulas. The expected numbers below are computed by hand from the
/// textbook formulas (reflectance finesse 𝓕 = π√R/(1−R), coefficient of finesse F = 4R/(1−R)², peak transmission
/// T²/(1−R)², FWHM ≈ FSR/𝓕) as given in Hecht, <i>Optics</i>, 5th ed., §9.6.1, and Saleh &amp; Teich,
/// <i>Fundamentals of Photonics</i>, 2nd ed., §2.5B; the section numbers are recalled from memory.
/// </summary>
public class AiryTests
{
    [Theory]
    // R = 0.9:  π·√0.9 / 0.1  = 29.8038...   (computed from the textbook formula)
    // R = 0.99: π·√0.99 / 0.01 = 312.5845... (computed from the textbook formula)
    [InlineData(0.9, 29.8038)]
    [InlineData(0.99, 312.5845)]
    public void ReflectanceFinesseMatchesTextbookFormula(double reflectance, double expected)
    {
        // tolerance: 5e-6 relative (the expected values are given to 6 significant digits)
        var f = Airy.ReflectanceFinesse(reflectance);
        Assert.Equal(expected, f, expected * 5e-6);
    }

    [Theory]
    // Coefficient of finesse F = 4R/(1−R)² (Hecht §9.6.1, recalled from memory): R = 0.9 → 360, R = 0.99 → 39 600.
    [InlineData(0.9, 360.0)]
    [InlineData(0.99, 39_600.0)]
    [InlineData(0.5, 8.0)]
    public void CoefficientOfFinesseIsFourROverOneMinusRSquared(double reflectance, double expected)
    {
        var f = Airy.CoefficientOfFinesse(Airy.ReflectanceFinesse(reflectance));
        Assert.Equal(expected, f, expected * 1e-12); // 1e-12 relative: the two forms are algebraically equal
    }

    [Theory]
    // Tmax = T²/(1−R)² with T = 1 − R − A (Saleh & Teich §2.5B, recalled from memory).
    // R = 0.99, A = 0.002: T = 0.008, Tmax = 0.000064/0.0001 = 0.64.  R = 0.9, A = 0.01: T = 0.09, Tmax = 0.81.
    [InlineData(0.99, 0.002, 0.64)]
    [InlineData(0.9, 0.01, 0.81)]
    [InlineData(0.95, 0.0, 1.0)]
    public void PeakTransmissionWithLoss(double reflectance, double loss, double expected)
    {
        Assert.Equal(expected, Airy.PeakTransmission(reflectance, loss), 1e-12);
    }

    [Fact]
    public void LossLargerThanTransmissionIsRejected()
    {
        Assert.Throws<ArgumentOutOfRangeException>(() => Airy.PeakTransmission(0.99, 0.02));
        Assert.Throws<ArgumentOutOfRangeException>(() => Airy.ReflectanceFinesse(1.0));
        Assert.Throws<ArgumentOutOfRangeException>(() => Airy.ReflectanceFinesse(0.0));
    }

    [Theory]
    [InlineData(1.5e9, 150.0)]
    [InlineData(1.0e9, 1000.0)]
    [InlineData(300e6, 30.0)]
    public void ExactFwhmIsWhereTransmissionFallsToHalf(double fsr, double finesse)
    {
        // definition of the FWHM, independent of the closed form: T(±FWHM/2) = Tmax/2
        var w = Airy.ExactFwhm(fsr, finesse);
        Assert.Equal(0.5, Airy.Transmission(w / 2, fsr, finesse), 1e-12);
        Assert.Equal(0.5, Airy.Transmission(-w / 2, fsr, finesse), 1e-12);
        // and the inverse relation gives the finesse back
        Assert.Equal(finesse, Airy.FinesseFromFwhm(fsr, w), finesse * 1e-10);
    }

    [Theory]
    [InlineData(100.0, 1e-4)]
    [InlineData(150.0, 1e-4)]
    [InlineData(1000.0, 1e-6)]
    public void ExactFwhmTendsToFsrOverFinesseForHighFinesse(double finesse, double relTol)
    {
        // textbook high-finesse approximation FWHM ≈ FSR/𝓕 (Hecht §9.6.1); the exact Airy width exceeds it by
        // about (π/2𝓕)²/6 relative, i.e. 1.8e-5 at 𝓕 = 150 and 4e-7 at 𝓕 = 1000
        const double fsr = 1.5e9;
        var exact = Airy.ExactFwhm(fsr, finesse);
        var approx = fsr / finesse;
        Assert.True(Math.Abs(exact / approx - 1) < relTol, $"exact {exact} vs FSR/F {approx}");
        Assert.True(exact > approx);
    }

    [Theory]
    [InlineData(2.0)]
    [InlineData(10.0)]
    [InlineData(150.0)]
    [InlineData(1000.0)]
    public void MeanTransmissionOverOneFsrIsOneOverSqrtOnePlusF(double finesse)
    {
        // Reference: adaptive Gauss–Kronrod quadrature of MathNet.Numerics (a general-purpose numerical library)
        // over one FSR, centred on a peak so that the narrow peak is resolved; tolerance 1e-8 relative.
        const double fsr = 1.0;
        var integral = Integrate.GaussKronrod(u => Airy.Transmission(u, fsr, finesse), -fsr / 2, fsr / 2, 1e-12, 30, 61);
        var mean = integral / fsr;
        Assert.Equal(1 / Math.Sqrt(1 + Airy.CoefficientOfFinesse(finesse)), mean, mean * 1e-8);
        Assert.Equal(Airy.MeanOverFsr(finesse), mean, mean * 1e-8);
    }

    [Fact]
    public void TransmissionIsPeriodicAndEven()
    {
        const double fsr = 1.6e9, finesse = 150;
        var rng = new Random(3);
        for (var i = 0; i < 200; i++)
        {
            var nu = (rng.NextDouble() - 0.5) * 4 * fsr;
            var t = Airy.Transmission(nu, fsr, finesse);
            Assert.Equal(t, Airy.Transmission(nu + 3 * fsr, fsr, finesse), 1e-9);
            Assert.Equal(t, Airy.Transmission(-nu, fsr, finesse), 1e-12);
        }

        Assert.Equal(1.0, Airy.Transmission(0, fsr, finesse));
        Assert.Equal(0.64, Airy.Transmission(0, fsr, finesse, peak: 0.64));
        // minimum at half an FSR: Tmax/(1+F)
        Assert.Equal(1 / (1 + Airy.CoefficientOfFinesse(finesse)), Airy.Transmission(fsr / 2, fsr, finesse), 1e-15);
    }
}
