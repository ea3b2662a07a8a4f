namespace OrderUnfold.Instruments;

/// <summary>
/// One transverse-mode family of a cavity as part of its instrument response: every source line also transmits,
/// with <see cref="RelativeHeight"/> of its TEM00 peak, where the cavity's family N is resonant.
/// </summary>
/// <param name="N">Family index N = m + n (0 is TEM00; 0 also stands for a family of unknown index found in the data).</param>
/// <param name="GouyOffsetFsr">o_N: how far the family lies above TEM00 of the same order, as a fraction of the FSR, in [0, 1).</param>
/// <param name="RelativeHeight">Peak height relative to the TEM00 peak of the same line.</param>
/// <param name="Basis">Where the offset came from ("measured", "mirror radii", …).</param>
public sealed record CavityModeFamily(int N, double GouyOffsetFsr, double RelativeHeight, string Basis)
{
    /// <summary>Where the family appears after each TEM00 peak along increasing scan frequency: (−o_N mod 1) of an FSR.</summary>
    public double ApparentOffsetFsr => Frac(-GouyOffsetFsr);

    /// <summary>The fractional part of <paramref name="v"/>, in [0, 1).</summary>
    public static double Frac(double v) => v - Math.Floor(v);
}

/// <summary>
/// Gouy-phase offsets of the transverse families of a two-mirror cavity: family N = m + n lies
/// N·arccos(±√(g₁g₂))/π of an FSR above TEM00 (mod 1), gᵢ = 1 − L/Rᵢ, the sign that of g₁ (and g₂)
/// (Siegman, <i>Lasers</i>, 1986, ch. 19, §19.3 "the resonance frequencies of stable two-mirror resonators").
/// A plane mirror has R = ∞ (g = 1).
/// </summary>
public static class GouyPhase
{
    /// <summary>g = 1 − L/R (R = ∞ for a plane mirror gives 1).</summary>
    public static double G(double lengthM, double radiusM) => double.IsInfinity(radiusM) ? 1 : 1 - lengthM / radiusM;

    /// <summary>Offset of family N above TEM00, fraction of an FSR in [0, 1); NaN when the cavity is not stable (0 ≤ g₁g₂ ≤ 1 fails).</summary>
    public static double OffsetFsr(int n, double lengthM, double radius1M, double radius2M)
    {
        var g1 = G(lengthM, radius1M);
        var g2 = G(lengthM, radius2M);
        var p = g1 * g2;
        if (!(p >= 0 && p <= 1)) return double.NaN;
        var root = Math.Sqrt(p);
        var sign = g1 + g2 < 0 ? -1.0 : 1.0;
        return CavityModeFamily.Frac(n * Math.Acos(sign * root) / Math.PI);
    }

    /// <summary>
    /// The radius of two equal mirrors (g₁ = g₂ = g) that puts family N = 1 at <paramref name="offsetFsr"/> above TEM00: the
    /// inverse of <see cref="OffsetFsr"/>, g = cos(π·o₁), R = L/(1 − g). Infinity for g = 1 (plane mirrors); NaN outside
    /// 0 &lt; o₁ &lt; 1.
    /// </summary>
    public static double EqualMirrorRadius(double offsetFsr, double lengthM)
    {
        if (!(offsetFsr > 0 && offsetFsr < 1) || !(lengthM > 0)) return double.NaN;
        var g = Math.Cos(Math.PI * offsetFsr);
        return g >= 1 ? double.PositiveInfinity : lengthM / (1 - g);
    }
}
