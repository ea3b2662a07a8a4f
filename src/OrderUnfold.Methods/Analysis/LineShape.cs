namespace OrderUnfold.Analysis;

/// <summary>
/// Airy profile T(δ) of a line, and its derivative in δ, with an optional intrinsic Lorentzian FWHM: a Lorentzian
/// convolved with the (near-Lorentzian) Airy peak is modelled as an Airy of linewidth (instrument + intrinsic) scaled
/// to keep the area, exact for Lorentzians in the high-finesse limit. The constants of one instrument and width are
/// computed once.
/// </summary>
/// <param name="Area">Peak scale that keeps the area when the line is wider than the instrument (1 for a narrow line).</param>
/// <param name="CoefficientOfFinesse">F = 4R/(1−R)² of the (possibly broadened) Airy function.</param>
/// <param name="PiOverFsr">π / FSR in 1/Hz.</param>
public readonly record struct LineShape(double Area, double CoefficientOfFinesse, double PiOverFsr)
{
    /// <summary>The cavity's transverse families (offset o_N·FSR in Hz, relative height), part of the response; null when none.</summary>
    public (double ShiftHz, double Height)[]? Families { get; init; }

    /// <summary>The profile of a line of intrinsic FWHM <paramref name="width"/> (Hz; 0: narrow) seen by <paramref name="inst"/>.</summary>
    public static LineShape For(Instrument inst, double width)
    {
        var lw = inst.LinewidthHz;
        var finesse = width > 0 ? inst.FsrHz / (lw + width) : inst.Finesse;
        return new LineShape(width > 0 ? lw / (lw + width) : 1.0, Airy.CoefficientOfFinesse(finesse), Math.PI / inst.FsrHz)
        {
            Families = inst.Families.Count == 0 ? null : inst.Families.Select(f => (f.GouyOffsetFsr * inst.FsrHz, f.RelativeHeight)).ToArray(),
        };
    }

    /// <summary>T(δ) and dT/dδ at detuning <paramref name="delta"/> (Hz), the transverse families included.</summary>
    public (double T, double dT) Evaluate(double delta)
    {
        var (t, dt) = Peak(delta);
        if (Families is { } fams)
            foreach (var (shift, height) in fams)
            {
                var (tf, dtf) = Peak(delta - shift);
                t += height * tf;
                dt += height * dtf;
            }

        return (t, dt);
    }

    private (double T, double dT) Peak(double delta)
    {
        var (s, c) = Math.SinCos(PiOverFsr * delta);
        var t = 1 / (1 + CoefficientOfFinesse * s * s);
        return (Area * t, -Area * CoefficientOfFinesse * 2 * s * c * PiOverFsr * t * t);
    }
}
