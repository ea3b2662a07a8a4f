namespace OrderUnfold.Calibration;

/// <summary>
/// The response of a single cavity mode swept linearly through resonance, in sample units.
/// <para>
/// The intracavity field a obeys the slowly-varying-envelope equation da/dt = (−1/τ + i·2π·Δ(t))·a + κ·E_in, with τ the
/// 1/e decay time of the field amplitude and Δ(t) = r·(t − t₀) the detuning of the drive from the swept resonance
/// (the coupled-mode equation of a driven lossy resonator, e.g. H. A. Haus, <i>Waves and Fields in Optoelectronics</i>,
/// 1984, the chapter on resonators; its use for a cavity swept through resonance, the ringing and the finesse
/// read from it: K. An et al., Opt. Lett. 20, 1068 (1995) and J. Poirson et al., J. Opt. Soc. Am. B 14, 2811 (1997) —
/// chapter and article details from memory). With b = a/(κ·E_in·τ) the static (slow-sweep) response is the
/// Lorentzian |b|² = 1/(1 + (2πΔτ)²), height 1 and FWHM 1/(π·τ) in Δ, so τ = 1/(π·linewidth) as in the
/// field-trace convention; the transmitted power is proportional to |b|².
/// </para>
/// <para>
/// Time is counted in samples (t = sample index), τ in samples and r in cycles per sample²; the caller converts
/// with the sample interval. Only |r| matters (the equation for −r is the complex conjugate one).
/// </para>
/// </summary>
public static class RingdownModel
{
    /// <summary>Integration steps per sample: the exponential step below is exact for the decay and the linear
    /// chirp of the phase and accurate to the second order for the drive term; two steps keep the error below
    /// 10⁻³ of the peak for ringing up to 0.3 cycles per sample (checked in the tests against 16 steps).</summary>
    public const int DefaultSubsteps = 2;

    /// <summary>
    /// Fills <paramref name="power"/>[k] = |b(start + k)|² for the swept response with crossing at sample
    /// <paramref name="crossing"/>, field decay time <paramref name="tau"/> samples and sweep rate
    /// <paramref name="rate"/> cycles/sample². The integration starts at <paramref name="start"/> from the
    /// adiabatic (quasi-static) field, which is exact far before the crossing.
    /// </summary>
    public static void Power(Span<double> power, double start, double crossing, double tau, double rate, int substeps = DefaultSubsteps)
    {
        if (power.Length == 0) return;
        if (!(tau > 0) || !double.IsFinite(tau) || !double.IsFinite(rate) || !double.IsFinite(crossing))
        {
            power.Fill(double.NaN);
            return;
        }

        substeps = Math.Max(1, substeps);
        var h = 1.0 / substeps;
        var g = 1.0 / tau;
        // adiabatic start: db/dt = z·b + g = 0 with z = −g + i·2πΔ
        var d0 = 2 * Math.PI * rate * (start - crossing);
        var den = g * g + d0 * d0;
        double br = g * g / den, bi = g * d0 / den;
        power[0] = br * br + bi * bi;
        var decay = Math.Exp(-g * h);
        var t = start;
        for (var k = 1; k < power.Length; k++)
        {
            for (var s = 0; s < substeps; s++)
            {
                var w = 2 * Math.PI * rate * (t + 0.5 * h - crossing); // angular detuning at the mid-step
                var (sin, cos) = Math.SinCos(w * h);
                // e = exp(z·h)
                double er = decay * cos, ei = decay * sin;
                // b ← b·e + g·(e − 1)/z, z = −g + i·w
                var nr = br * er - bi * ei;
                var ni = br * ei + bi * er;
                double ur = er - 1, ui = ei;
                var zz = g * g + w * w;
                // (u)/(z) = u·conj(z)/|z|², conj(z) = −g − i·w
                var qr = (ur * -g + ui * w) / zz;
                var qi = (ui * -g - ur * w) / zz;
                br = nr + g * qr;
                bi = ni + g * qi;
                t += h;
            }

            t = start + k; // no drift from the repeated additions
            power[k] = br * br + bi * bi;
        }
    }

    /// <summary>The static response 1/(1 + (2·(n − centre)/fwhm)²) of height 1 (the slow-sweep limit of <see cref="Power"/>).</summary>
    public static double Lorentzian(double n, double centre, double fwhm)
    {
        var u = 2 * (n - centre) / fwhm;
        return 1 / (1 + u * u);
    }

    /// <summary>Static FWHM in samples of a resonance crossed at rate r with field decay time τ: linewidth / r = 1/(π·τ·r).</summary>
    public static double StaticFwhmSamples(double tau, double rate) => 1 / (Math.PI * tau * Math.Abs(rate));

    /// <summary>Sweep rate over linewidth squared, r/(1/(π·τ))² = π²·r·τ² (dimensionless; ≫ 1 means a strongly dynamic sweep).</summary>
    public static double Dynamics(double tau, double rate) => Math.PI * Math.PI * Math.Abs(rate) * tau * tau;

    /// <summary>Shape of the swept response at one value of <see cref="Dynamics"/>, in units of τ.</summary>
    /// <param name="Dynamics">π²·r·τ².</param>
    /// <param name="FwhmTau">FWHM of the main maximum of |b|², in τ.</param>
    /// <param name="DelayTau">Delay of the main maximum after the crossing, in τ.</param>
    /// <param name="Height">Height of the main maximum (the static peak is 1).</param>
    public sealed record Shape(double Dynamics, double FwhmTau, double DelayTau, double Height);

    private static readonly Lazy<Shape[]> ShapeTable = new(() =>
        new[] { 0.05, 0.2, 0.5, 1, 2, 4, 8, 16, 32, 64 }.Select(ComputeShape).ToArray());

    /// <summary>Shapes at a ladder of dynamics values (computed once), used for starting values.</summary>
    public static IReadOnlyList<Shape> Shapes => ShapeTable.Value;

    private static Shape ComputeShape(double dynamics)
    {
        const double tau = 40; // samples: fine enough for every entry of the table
        var rate = dynamics / (Math.PI * Math.PI * tau * tau);
        var staticHalf = 0.5 * StaticFwhmSamples(tau, rate);
        var before = Math.Max(12 * tau, 30 * staticHalf);
        var after = Math.Max(20 * tau, 30 * staticHalf);
        var n = (int)Math.Ceiling(before + after);
        var p = new double[n];
        Power(p, -before, 0, tau, rate, 4);
        var top = 0;
        for (var i = 1; i < n; i++) if (p[i] > p[top]) top = i;
        var half = 0.5 * p[top];
        var lo = top;
        while (lo > 0 && p[lo - 1] > half) lo--;
        var hi = top;
        while (hi < n - 1 && p[hi + 1] > half) hi++;
        var left = lo > 0 ? lo - 1 + (half - p[lo - 1]) / (p[lo] - p[lo - 1]) : lo;
        var right = hi < n - 1 ? hi + (p[hi] - half) / (p[hi] - p[hi + 1]) : hi;
        return new Shape(dynamics, (right - left) / tau, (top - before) / tau, p[top]);
    }
}
