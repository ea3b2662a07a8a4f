using OrderUnfold.Analysis;
using OrderUnfold.Instruments;

namespace OrderUnfold.Planning;

/// <summary>
/// The signal-to-noise ratio a measurement needs so that a line moved by an alias shift Δ fits the sweeps
/// visibly worse than the line in its true place.
/// </summary>
/// <remarks>
/// Near a transmission peak the Airy profile is a Lorentzian of FWHM Γ = FSR/𝓕 (high finesse). A peak of height
/// A moved by d = m·Γ changes the sweep by A·[L(x) − L(x − d)], whose squared integral is
/// A²·(πΓ/2)·m²/(1 + m²) (the overlap of two Lorentzians is a Lorentzian of twice the width). With n samples per
/// linewidth, P peak passes and Gaussian noise σ, χ² therefore rises by
/// (A/σ)²·P·n·(π/2)·m²/(1 + m²) in that instrument; the instruments add. The needed peak SNR A/σ is where the
/// sum reaches the required Δχ². This is an ideal-fit estimate: offsets, gains, backgrounds and other lines are
/// taken as known, so a real measurement needs somewhat more.
/// </remarks>
public static class AliasSnr
{
    /// <summary>Δχ² caused by moving a line of peak SNR 1 by <paramref name="deltaHz"/>, summed over the instruments.</summary>
    public static double ChiSquarePerUnitSnr(IReadOnlyList<Instrument> instruments, double deltaHz, SweepSampling sampling)
    {
        var sum = 0.0;
        foreach (var inst in instruments)
        {
            var m = AliasMargin.Misfit(inst, deltaHz);
            var perLinewidth = sampling.SamplesPerFsr / inst.Finesse;
            sum += sampling.PeakPasses * perLinewidth * (Math.PI / 2) * m * m / (1 + m * m);
        }

        return sum;
    }

    /// <summary>Peak SNR (peak height over noise σ) at which moving a line by Δ raises χ² by
    /// <paramref name="deltaChiSquare"/>; infinite when Δ is an exact alias.</summary>
    public static double RequiredPeakSnr(IReadOnlyList<Instrument> instruments, double deltaHz, SweepSampling sampling, double deltaChiSquare = 25)
    {
        var per = ChiSquarePerUnitSnr(instruments, deltaHz, sampling);
        return per > 0 ? Math.Sqrt(deltaChiSquare / per) : double.PositiveInfinity;
    }
}
