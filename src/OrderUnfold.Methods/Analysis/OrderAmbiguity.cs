using System.Globalization;
using OrderUnfold.Inversion;

namespace OrderUnfold.Analysis;

/// <summary>The unambiguous range for these instruments and this noise: how far a line of a given intensity could be
/// moved before a copy of it fits within the doubtful Δχ² threshold, from each sweep's sample density (no refit).</summary>
public static class OrderAmbiguity
{
    /// <summary>Scan steps allowed to <see cref="UnambiguousRange"/> (a larger range is scanned in coarser steps): bounds
    /// its cost to a few seconds at worst. Chosen bound.</summary>
    private const int MaxScanSteps = 4_000_000;

    /// <summary>Scan steps per linewidth of the narrowest instrument (a quarter linewidth resolves where the Airy
    /// autocorrelation falls off). Chosen.</summary>
    private const double ScanStepsPerLinewidth = 4;

    /// <summary>A line that cannot be told from itself moved by this many widest linewidths is too weak to place.</summary>
    private const double OwnPeakLinewidths = 4;

    /// <summary>
    /// Approximate Δχ² between a line of raw intensity <paramref name="intensity"/> (first sweep's gain = 1) and the same line
    /// moved by <paramref name="shiftHz"/> with its intensity refitted, from each sweep's sample density: with N_k samples
    /// spread evenly over whole FSRs, Σᵢ h(uᵢ) ≈ (N_k/FSR_k)∫₀^FSR h, so with c_k = (a g_k/σ_k)² N_k/FSR_k and the Airy
    /// autocorrelation R_k(δ) = ∫₀^FSR T(u)T(u+δ)du, Δχ² = S₀ − S₁²/S₀ where S₀ = Σ c_k R_k(0), S₁ = Σ c_k R_k(δ).
    /// R_k has a closed form: the Airy function is a multiple of the Poisson kernel P_r, and P_r ⊛ P_r = P_{r²}, so
    /// R(δ) = FSR·((1−r)/(1+r))²·P_{r²}(2πδ/FSR) with P_s(θ) = (1−s²)/(1−2s cos θ+s²) and r from 𝓕 = π√r/(1−r).
    /// Backgrounds drop out (a moved line has the same mean over whole FSRs); other lines are ignored.
    /// </summary>
    public static double AliasChiSquareEstimate(IReadOnlyList<CalibratedSweep> sweeps, IReadOnlyList<SweepFit> fits, double intensity, double shiftHz)
    {
        double s0 = 0, s1 = 0;
        for (var k = 0; k < sweeps.Count; k++)
        {
            var inst = sweeps[k].Instrument;
            var c = Math.Pow(intensity * fits[k].Gain / sweeps[k].NoiseSigma, 2) * sweeps[k].Signal.Length / inst.FsrHz;
            s0 += c * AiryAutocorrelation(inst, 0);
            s1 += c * AiryAutocorrelation(inst, shiftHz);
        }

        return s0 > 0 ? s0 - s1 * s1 / s0 : 0;
    }

    /// <summary>∫₀^FSR T(u)·T(u+δ) du for the Airy function of peak 1 (closed form via the Poisson kernel).</summary>
    public static double AiryAutocorrelation(Instrument inst, double deltaHz)
    {
        var f = inst.Finesse;
        var x = (-Math.PI + Math.Sqrt(Math.PI * Math.PI + 4 * f * f)) / (2 * f); // √r
        var r = x * x;
        var s = r * r;
        var theta = 2 * Math.PI * deltaHz / inst.FsrHz;
        var poisson = (1 - s * s) / (1 - 2 * s * Math.Cos(theta) + s * s);
        var q = (1 - r) / (1 + r);
        return inst.FsrHz * q * q * poisson;
    }

    /// <summary>
    /// Smallest shift Δ &gt; 0 beyond the line's own peak at which <see cref="AliasChiSquareEstimate"/> falls below
    /// <paramref name="threshold"/>, scanned in steps of a quarter of the narrowest linewidth up to <paramref name="limitHz"/>.
    /// Returns (limit, true) when none is found; (NaN, false) when the line cannot even be told from itself moved by a few
    /// linewidths (too weak to place).
    /// </summary>
    public static (double RangeHz, bool LowerBound) UnambiguousRange(IReadOnlyList<CalibratedSweep> sweeps, IReadOnlyList<SweepFit> fits,
        double intensity, double threshold, double limitHz)
    {
        var narrow = sweeps.Min(s => s.Instrument.LinewidthHz);
        var wide = sweeps.Max(s => s.Instrument.LinewidthHz);
        var step = narrow / ScanStepsPerLinewidth;
        if (limitHz / step > MaxScanSteps) step = limitHz / MaxScanSteps;
        var d = step;
        // leave the line's own peak
        while (d <= limitHz && AliasChiSquareEstimate(sweeps, fits, intensity, d) < threshold)
        {
            d += step;
            if (d > OwnPeakLinewidths * wide) return (double.NaN, false);
        }

        for (; d <= limitHz; d += step)
        {
            if (AliasChiSquareEstimate(sweeps, fits, intensity, d) < threshold) return (d, false);
        }

        return (limitHz, true);
    }

    /// <summary>The unambiguous range of the weakest kept line (raw intensity <paramref name="weakest"/>, the anchor's
    /// <paramref name="anchor"/>) stated in one sentence; with one instrument (orders not resolved) only the sentence.</summary>
    internal static (double? RangeHz, bool LowerBound, string Statement) Statement(RefinementContext context, IReadOnlyList<SweepFit> sweepFits,
        double weakest, double anchor)
    {
        var grid = context.Grid;
        if (!grid.OrdersResolved) return (null, false, "one instrument: the spectrum is folded into one FSR; orders are unknown");
        var doubtful = context.Options.DoubtfulDeltaChiSquare;
        var limit = Math.Max(grid.Grid.EndHz - grid.Grid.StartHz, 2 * grid.UnambiguousRangeHz);
        var (r, lb) = UnambiguousRange(context.Sweeps, sweepFits, weakest, doubtful, limit);
        var range = LineRefiner.FiniteOrNull(r);
        var who = $"the order of a line as weak as the weakest one kept (intensity {weakest / anchor:G3} of the anchor)";
        var dchi = doubtful.ToString("G3", CultureInfo.InvariantCulture);
        var statement = range is null
            ? $"at this noise {who} cannot be pinned: a shift of a few linewidths already fits within Δχ² < {dchi}"
            : lb
                ? $"for these instruments and this noise {who} is unambiguous within ±{Quantity.FormatFrequency(r)}: no shift up to that fits within Δχ² < {dchi}"
                : $"for these instruments and this noise {who} is unambiguous within ±{Quantity.FormatFrequency(r)}: a shift of that size would fit within Δχ² < {dchi}";
        return (range, lb, statement);
    }
}
