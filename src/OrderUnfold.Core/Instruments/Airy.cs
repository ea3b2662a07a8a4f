namespace OrderUnfold.Instruments;

/// <summary>
/// Airy transmission of a lossless-geometry Fabry–Pérot cavity and the relations between finesse,
/// mirror reflectance and linewidth (Hecht, <i>Optics</i>, 5th ed., §9.6.1; Saleh &amp; Teich,
/// <i>Fundamentals of Photonics</i>, 2nd ed., §2.5B).
/// </summary>
public static class Airy
{
    /// <summary>Coefficient of finesse F = (2𝓕/π)² for a finesse 𝓕.</summary>
    public static double CoefficientOfFinesse(double finesse) => Math.Pow(2 * finesse / Math.PI, 2);

    /// <summary>Reflectance finesse 𝓕 = π√R / (1 − R).</summary>
    public static double ReflectanceFinesse(double reflectance)
    {
        if (!(reflectance > 0 && reflectance < 1))
            throw new ArgumentOutOfRangeException(nameof(reflectance), reflectance, "reflectance must lie strictly between 0 and 1");
        return Math.PI * Math.Sqrt(reflectance) / (1 - reflectance);
    }

    /// <summary>Peak transmission Tmax = T² / (1 − R)² with T = 1 − R − A (mirror loss A per mirror).</summary>
    public static double PeakTransmission(double reflectance, double loss = 0)
    {
        var t = 1 - reflectance - loss;
        if (t < 0) throw new ArgumentOutOfRangeException(nameof(loss), loss, "mirror loss plus reflectance exceeds 1");
        return t * t / ((1 - reflectance) * (1 - reflectance));
    }

    /// <summary>T(ν) = Tmax / (1 + F sin²(π ν / FSR)); ν is the detuning from a transmission peak.</summary>
    public static double Transmission(double detuningHz, double fsrHz, double finesse, double peak = 1)
    {
        var s = Math.Sin(Math.PI * detuningHz / fsrHz);
        return peak / (1 + CoefficientOfFinesse(finesse) * s * s);
    }

    /// <summary>Mean of T over whole FSRs divided by Tmax: 1/√(1+F).</summary>
    public static double MeanOverFsr(double finesse) => 1 / Math.Sqrt(1 + CoefficientOfFinesse(finesse));

    /// <summary>Full width at half maximum of a transmission peak, exact for the Airy function:
    /// FSR·(2/π)·asin(1/√F); for high finesse this tends to FSR/𝓕.</summary>
    public static double ExactFwhm(double fsrHz, double finesse) =>
        fsrHz * 2 / Math.PI * Math.Asin(Math.Min(1, 1 / Math.Sqrt(CoefficientOfFinesse(finesse))));

    /// <summary>Finesse that gives a measured FWHM for a given FSR (inverse of <see cref="ExactFwhm"/>).</summary>
    public static double FinesseFromFwhm(double fsrHz, double fwhmHz)
    {
        var s = Math.Sin(Math.PI * fwhmHz / (2 * fsrHz));
        return Math.PI / (2 * s);
    }
}
