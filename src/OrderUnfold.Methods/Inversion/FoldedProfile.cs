namespace OrderUnfold.Inversion;

/// <summary>
/// A sweep folded onto one FSR: the mean signal (minus its mean) in each bin of a periodic grid of M = 2^k points.
/// Two sweeps of the same instrument see the same folded spectrum shifted by the difference of their frequency
/// origins, P_k(u) = P_ref(u + φ_k − φ_ref), so that difference follows from their circular cross-correlation
/// without solving the inverse problem.
/// </summary>
public static class FoldedProfile
{
    /// <summary>Folds a calibrated sweep onto M bins over its instrument's FSR; empty bins are filled by linear interpolation.</summary>
    public static double[] Fold(CalibratedSweep sweep, int m)
    {
        var fsr = sweep.Instrument.FsrHz;
        var sum = new double[m];
        var count = new int[m];
        for (var i = 0; i < sweep.Signal.Length; i++)
        {
            var b = (int)(SweepOperator.PositiveMod(sweep.ScanHz[i], fsr) / fsr * m);
            if (b >= m) b = m - 1;
            sum[b] += sweep.Signal[i];
            count[b]++;
        }

        var p = new double[m];
        var filled = new List<int>();
        for (var b = 0; b < m; b++)
        {
            if (count[b] == 0) continue;
            p[b] = sum[b] / count[b];
            filled.Add(b);
        }

        if (filled.Count == 0) return p;
        // fill gaps cyclically by linear interpolation between the nearest filled bins
        for (var f = 0; f < filled.Count; f++)
        {
            var a = filled[f];
            var c = filled[(f + 1) % filled.Count];
            var gap = (c - a + m) % m;
            if (gap <= 1 && filled.Count > 1) continue;
            if (filled.Count == 1) gap = m;
            for (var g = 1; g < gap; g++)
            {
                var t = g / (double)gap;
                p[(a + g) % m] = (1 - t) * p[a] + t * p[c];
            }
        }

        var mean = p.Average();
        for (var b = 0; b < m; b++) p[b] -= mean;
        return p;
    }

    /// <summary>
    /// The shift δ (Hz, in [−FSR/2, FSR/2)) that maximises Σ_u P_k(u) P_ref(u + δ), to sub-bin precision by a parabola
    /// through the peak of the circular cross-correlation.
    /// </summary>
    public static double Shift(double[] reference, double[] other, double fsrHz)
    {
        var m = reference.Length;
        var c = CrossCorrelation(reference, other);
        var best = 0;
        for (var i = 1; i < m; i++) if (c[i] > c[best]) best = i;
        var lag = best + PeakOffset(c, best);
        if (lag >= m / 2.0) lag -= m;
        return lag * fsrHz / m;
    }

    /// <summary>
    /// The circular cross-correlation C(δ) = Σ_u P_k(u) P_ref(u + δ) at every lag δ = 0 … M−1 at once, by FFT
    /// (Ĉ = conj(P̂_k) · P̂_ref): O(M log M) for all M shifts instead of O(M²). Both inputs have the same length, a power of two.
    /// </summary>
    public static double[] CrossCorrelation(double[] reference, double[] other)
    {
        var m = reference.Length;
        if (other.Length != m) throw new ArgumentException("both profiles need the same length");
        var re1 = (double[])reference.Clone();
        var im1 = new double[m];
        var re2 = (double[])other.Clone();
        var im2 = new double[m];
        Fft.Transform(re1, im1, forward: true);
        Fft.Transform(re2, im2, forward: true);
        var re = new double[m];
        var im = new double[m];
        for (var i = 0; i < m; i++)
        {
            re[i] = re2[i] * re1[i] + im2[i] * im1[i];
            im[i] = re2[i] * im1[i] - im2[i] * re1[i];
        }

        Fft.Transform(re, im, forward: false);
        return re;
    }

    /// <summary>Sub-bin position of a maximum of a periodic sequence: the vertex of the parabola through the bin and its two
    /// neighbours, in bins relative to <paramref name="index"/> (within ±½).</summary>
    public static double PeakOffset(double[] c, int index)
    {
        var m = c.Length;
        var ym = c[(index - 1 + m) % m];
        var y0 = c[index];
        var yp = c[(index + 1) % m];
        var curvature = ym - 2 * y0 + yp;
        var frac = curvature < 0 ? 0.5 * (ym - yp) / curvature : 0;
        return Math.Clamp(frac, -0.5, 0.5);
    }
}
