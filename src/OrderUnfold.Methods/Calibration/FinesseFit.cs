using OrderUnfold.Instruments;

namespace OrderUnfold.Calibration;

/// <summary>An Airy profile fitted to one transmission peak on a calibrated axis.</summary>
/// <param name="X">Scan coordinate of the peak.</param>
/// <param name="CenterHz">Fitted centre on the axis, Hz.</param>
/// <param name="Height">Fitted peak height above the baseline (signal units).</param>
/// <param name="Baseline">Fitted baseline (signal units).</param>
/// <param name="Finesse">Fitted finesse (period / FWHM).</param>
/// <param name="FinesseSigma">Standard error of the finesse (scaled by the reduced χ² when above 1).</param>
/// <param name="ReducedChiSquare">χ² per degree of freedom of the fit, with the sweep's noise σ.</param>
/// <param name="DetuningHz">Detuning of each fitted sample from the centre, Hz.</param>
/// <param name="Measured">Measured signal at those samples.</param>
/// <param name="Model">Fitted profile at those samples.</param>
public sealed record PeakProfileFit(double X, double CenterHz, double Height, double Baseline, double Finesse, double FinesseSigma,
    double ReducedChiSquare, double[] DetuningHz, double[] Measured, double[] Model);

/// <summary>
/// The peak shape averaged over the fitted peaks, normalised to height 1 and plotted against detuning in units of
/// the fitted FWHM, beside the Airy profile of the same finesse. A shape that differs from the Airy function
/// (mirror defects, misalignment, a laser that is not single-frequency) shows here.
/// </summary>
/// <param name="DetuningFwhm">Bin centres, detuning / FWHM.</param>
/// <param name="Measured">Mean normalised signal per bin (NaN where no sample fell).</param>
/// <param name="Airy">Airy profile of the mean finesse at the bin centres.</param>
/// <param name="RmsDeviation">RMS of measured − Airy over the bins, relative to the peak height.</param>
/// <param name="OddRms">RMS of the odd (asymmetric) part of the measured profile, relative to the peak height.</param>
/// <param name="NoiseRms">RMS deviation expected from noise alone, relative to the peak height.</param>
/// <param name="AiryShaped">False when the deviation is both above 3 % and well above the noise.</param>
public sealed record InstrumentProfile(double[] DetuningFwhm, double[] Measured, double[] Airy, double RmsDeviation, double OddRms, double NoiseRms, bool AiryShaped);

/// <summary>Effective finesse from Airy fits to isolated peaks.</summary>
/// <param name="Finesse">Weighted mean finesse of the fitted peaks.</param>
/// <param name="Sigma">Its standard error (inflated by the scatter between peaks when that exceeds their errors).</param>
/// <param name="Peaks">The individual fits.</param>
/// <param name="ScatterChiSquare">χ² per degree of freedom of the peaks' finesses about the mean (about 1 when they agree).</param>
/// <param name="Consistent">True when the peaks agree within their errors (no sign of lines with their own width).</param>
/// <param name="Profile">The averaged peak shape against the Airy function.</param>
/// <param name="Warnings">What looked wrong.</param>
public sealed record FinesseEstimate(double Finesse, double Sigma, IReadOnlyList<PeakProfileFit> Peaks, double ScatterChiSquare, bool Consistent,
    InstrumentProfile? Profile, IReadOnlyList<string> Warnings)
{
    /// <summary>The Airy period on the fitted axis (the FSR in source frequency units), Hz.</summary>
    public double PeriodHz { get; init; }

    /// <summary>The fit to show in a plot: the tallest peak whose finesse is within two σ of the mean, else the tallest.</summary>
    public PeakProfileFit? Representative =>
        Peaks.Where(p => Math.Abs(p.Finesse - Finesse) <= 2 * Math.Max(p.FinesseSigma, Sigma)).MaxBy(p => p.Height) ?? Peaks.MaxBy(p => p.Height);
}

/// <summary>
/// Fits the Airy function T = b + A / (1 + (2𝓕/π)² sin²(π(ν − ν₀)/P)) to transmission peaks on a calibrated
/// axis, with ν₀, A, b and the finesse 𝓕 free and the period P (the FSR) fixed (Hecht, <i>Optics</i>, 5th ed.,
/// §9.6.1). The effective finesse of the instrument is the weighted mean over isolated peaks.
/// </summary>
public static class FinesseFit
{
    /// <summary>Half-width of the fitted stretch around a peak, in FWHM.</summary>
    public const double HalfWindowFwhm = 4;

    /// <summary>Fits one peak. <paramref name="frequencyHz"/> is the calibrated axis at each sample; null when the fit fails.</summary>
    public static PeakProfileFit? FitPeak(IReadOnlyList<double> frequencyHz, IReadOnlyList<double> signal, double centerHz, double fwhmGuessHz,
        double periodHz, double noiseSigma, double x = double.NaN, double halfWindowFwhm = HalfWindowFwhm)
    {
        if (!(fwhmGuessHz > 0) || !(periodHz > 0) || !(noiseSigma > 0)) return null;
        var half = Math.Min(halfWindowFwhm * fwhmGuessHz, 0.45 * periodHz);
        var idx = new List<int>();
        for (var i = 0; i < frequencyHz.Count; i++)
            if (Math.Abs(frequencyHz[i] - centerHz) <= half && double.IsFinite(signal[i])) idx.Add(i);
        if (idx.Count < 8) return null;
        var f = idx.Select(i => frequencyHz[i]).ToArray();
        var y = idx.Select(i => signal[i]).ToArray();
        var baseline = y.Min();
        var height = y.Max() - baseline;
        if (!(height > 3 * noiseSigma)) return null;
        var finesse0 = Math.Max(1.5, periodHz / fwhmGuessHz);
        var m = y.Length;

        var start = new[] { centerHz, height, baseline, finesse0 };
        var lower = new[] { centerHz - half, 0.0, double.NegativeInfinity, 1.0 };
        var upper = new[] { centerHz + half, double.PositiveInfinity, double.PositiveInfinity, 1e7 };
        var result = LevenbergMarquardt.MinimiseResiduals(AirySum(f, y, 1, periodHz, noiseSigma), start, m, LmSettings.Relative(60, 1e-9) with { Lower = lower, Upper = upper });
        var covariance = result.Covariance();
        var pr = result.P;
        if (covariance is null || !(pr[1] > 0)) return null;
        var dof = Math.Max(1, m - 4);
        var reduced = result.ChiSquare / dof;
        var sigma = Math.Sqrt(Math.Max(0, covariance[3, 3]) * Math.Max(1, reduced));
        if (!double.IsFinite(sigma) || !(pr[3] > 1)) return null;
        var model = AirySumModel(pr, 1, f, periodHz);
        return new PeakProfileFit(x, pr[0], pr[1], pr[2], pr[3], sigma, reduced, f.Select(v => v - pr[0]).ToArray(), y, model);
    }

    /// <summary>
    /// Effective finesse of a sweep on a calibrated axis from its isolated peaks (no other peak above 3 % of its
    /// height within <see cref="HalfWindowFwhm"/> + 1.5 FWHM). Null when no peak could be fitted.
    /// </summary>
    /// <param name="sweep">The sweep.</param>
    /// <param name="axis">Its calibrated axis f(x), Hz.</param>
    /// <param name="periodHz">The Airy period on that axis (the FSR, or FSR·λ_cal/λ_source for a calibration laser).</param>
    /// <param name="finesseGuess">Stated finesse (only to judge peaks that are too narrow to sample).</param>
    /// <param name="peaks">Peaks already found (null: found here).</param>
    /// <param name="maxPeaks">Most peaks fitted (the tallest isolated ones).</param>
    public static FinesseEstimate? FromSweep(Sweep sweep, AxisPolynomial axis, double periodHz, double finesseGuess, IReadOnlyList<Peak>? peaks = null, int maxPeaks = 24)
    {
        peaks ??= ResolvedPeaks.Find(sweep.X, sweep.Y, 0.05, 8);
        if (peaks.Count == 0) return null;
        var noise = NoiseEstimator.FirstDifferenceSigma(sweep.Y);
        if (!(noise > 0)) return null;
        if (RecordOnAxis(sweep, axis, peaks) is not var (freq, sig, info)) return null;
        var (fits, samplesPerFwhm, poor, poorSamples) = FitIsolatedPeaks(info, freq, sig, periodHz, noise, maxPeaks);
        var warnings = new List<string>();
        if (fits.Count == 0 && poor.Count > 0)
        {
            fits = poor;
            samplesPerFwhm = poorSamples;
            warnings.Add($"no peak fits the Airy profile within its noise (reduced χ² {poor.Min(p => p.ReducedChiSquare):F0} at best): the finesse below is only an effective width");
        }

        var blended = false;
        if (fits.Count == 0)
        {
            // no isolated peak: fit the tallest blend of peaks (lines closer than a few widths) jointly, every peak with
            // its own centre and height and one common finesse
            var blend = FitBlend(freq, sig, info.Select(q => (q.F, q.Fwhm, q.Peak.Height, q.Peak.X)).ToList(), periodHz, noise);
            if (blend is not null)
            {
                blended = true;
                fits.Add(blend);
                samplesPerFwhm.Add(info.Average(q => q.Peak.WidthSamples));
                warnings.Add($"no isolated peak: the finesse is fitted jointly to a blend of {blend.DetuningHz.Length} samples around the tallest peak (reduced χ² {blend.ReducedChiSquare:F1})");
            }
        }

        if (fits.Count == 0) return null;
        var (mean, sigma, scatter, scattered) = Combine(fits, warnings);
        var consistent = !scattered && !ReferenceEquals(fits, poor);
        var perFwhm = samplesPerFwhm.Average();
        if (perFwhm < 4)
            warnings.Add($"peaks are only {perFwhm:F1} samples wide (FWHM): the fitted finesse is unreliable; sample faster or sweep fewer FSRs");

        var profile = blended ? null : Profile(fits, mean, periodHz, noise); // a blend's samples hold its neighbours too
        if (profile is { AiryShaped: false })
            warnings.Add($"the averaged peak is not Airy-shaped (RMS deviation {100 * profile.RmsDeviation:F1} % of the height, asymmetric part {100 * profile.OddRms:F1} %): " +
                         "mirror defects, misalignment or transverse modes; the finesse is an effective value and the fitted line positions may be biased");
        return new FinesseEstimate(mean, sigma, fits, scatter, consistent, profile, warnings) { PeriodHz = periodHz };
    }

    /// <summary>A peak on the calibrated axis: its frequency and FWHM there.</summary>
    private readonly record struct PeakOnAxis(Peak Peak, double F, double Fwhm);

    /// <summary>
    /// The samples on the calibrated range plus a few peak widths (a peak at the end of the range — a sweep of little more
    /// than one period has its only peaks there — is fitted on the axis extrapolated over a few linewidths), as frequency
    /// and signal, and the peaks inside it; null when fewer than 16 samples remain.
    /// </summary>
    private static (double[] Freq, double[] Sig, List<PeakOnAxis> Info)? RecordOnAxis(Sweep sweep, AxisPolynomial axis, IReadOnlyList<Peak> peaks)
    {
        var widestX = peaks.Select(p =>
        {
            var i = (int)Math.Clamp(Math.Round(p.Position), 1, sweep.Count - 2);
            return p.WidthSamples * Math.Abs(sweep.X[i + 1] - sweep.X[i - 1]) / 2;
        }).Max();
        var margin = Math.Max(0.02 * (axis.XMax - axis.XMin), (HalfWindowFwhm + 2) * widestX);
        var lo = axis.XMin - margin;
        var hi = axis.XMax + margin;
        var inRange = Enumerable.Range(0, sweep.Count).Where(i => sweep.X[i] >= lo && sweep.X[i] <= hi).ToArray();
        if (inRange.Length < 16) return null;
        var freq = inRange.Select(i => axis.Evaluate(sweep.X[i])).ToArray();
        var sig = inRange.Select(i => sweep.Y[i]).ToArray();
        var info = peaks.Select(p =>
        {
            var i = (int)Math.Clamp(Math.Round(p.Position), 1, sweep.Count - 2);
            var dxdi = Math.Abs(sweep.X[i + 1] - sweep.X[i - 1]) / 2;
            var fwhm = p.WidthSamples * dxdi * Math.Abs(axis.Derivative(p.X));
            return new PeakOnAxis(p, axis.Evaluate(p.X), fwhm);
        }).Where(q => q.Fwhm > 0 && q.Peak.X >= lo && q.Peak.X <= hi).ToList();
        return (freq, sig, info);
    }

    /// <summary>Fits the tallest isolated peaks (no other peak above 3 % of the height within reach), up to
    /// <paramref name="maxPeaks"/>; fits far outside the noise (a blend of lines, a shoulder) are kept aside as poor.</summary>
    private static (List<PeakProfileFit> Fits, List<double> Samples, List<PeakProfileFit> Poor, List<double> PoorSamples) FitIsolatedPeaks(
        List<PeakOnAxis> info, double[] freq, double[] sig, double periodHz, double noise, int maxPeaks)
    {
        var fits = new List<PeakProfileFit>();
        var poor = new List<PeakProfileFit>();
        var samplesPerFwhm = new List<double>();
        var poorSamples = new List<double>();
        foreach (var q in info.OrderByDescending(q => q.Peak.Height))
        {
            if (fits.Count >= maxPeaks) break;
            var reach = (HalfWindowFwhm + 1.5) * q.Fwhm;
            var crowded = info.Any(o => !ReferenceEquals(o.Peak, q.Peak) && o.Peak.Height > 0.03 * q.Peak.Height && Math.Abs(o.F - q.F) < reach);
            if (crowded) continue;
            // stay inside the record: the whole window must be sampled; near the ends of a short record the window
            // shrinks to what the record holds, down to 2 FWHM on each side (still the whole peak and its wings)
            var room = Math.Min(Math.Abs(q.F - freq.Min()), Math.Abs(freq.Max() - q.F)) / q.Fwhm;
            if (room < 2) continue;
            var fit = FitPeak(freq, sig, q.F, q.Fwhm, periodHz, noise, q.Peak.X, Math.Min(HalfWindowFwhm, room));
            if (fit is null) continue;
            if (fit.ReducedChiSquare > 25)
            {
                poor.Add(fit);
                poorSamples.Add(q.Peak.WidthSamples);
                continue;
            }

            fits.Add(fit);
            samplesPerFwhm.Add(q.Peak.WidthSamples);
        }

        return (fits, samplesPerFwhm, poor, poorSamples);
    }

    /// <summary>Weighted mean of the fitted finesses with its σ (inflated by the scatter χ² when above 1); peaks that
    /// disagree beyond their (small) noise but only by a few per cent still measure the finesse, whereas a spread of more
    /// than 10 % RMS is not one finesse (scattered, with a warning).</summary>
    private static (double Mean, double Sigma, double Scatter, bool Scattered) Combine(List<PeakProfileFit> fits, List<string> warnings)
    {
        var weights = fits.Select(p => 1 / (p.FinesseSigma * p.FinesseSigma)).ToArray();
        var sw = weights.Sum();
        var mean = fits.Select((p, i) => weights[i] * p.Finesse).Sum() / sw;
        var scatter = fits.Count > 1 ? fits.Select((p, i) => weights[i] * (p.Finesse - mean) * (p.Finesse - mean)).Sum() / (fits.Count - 1) : 1.0;
        var sigma = Math.Sqrt(1 / sw) * Math.Sqrt(Math.Max(1, scatter));
        var spread = fits.Count > 1 ? Math.Sqrt(fits.Sum(p => (p.Finesse - mean) * (p.Finesse - mean)) / (fits.Count - 1)) / mean : 0;
        var scattered = fits.Count >= 3 && scatter > 6 && spread > 0.1;
        if (scattered)
        {
            var sorted = fits.Select(p => p.Finesse).OrderBy(v => v).ToArray();
            warnings.Add($"the widths of the {fits.Count} fitted peaks differ more than their noise allows (finesse {sorted[0]:F0} to {sorted[^1]:F0}, scatter χ² {scatter:F1}): " +
                         "lines with a width of their own, overlapping lines, or a drifting alignment; the effective finesse is not taken from them");
        }

        return (mean, sigma, scatter, scattered);
    }

    /// <summary>
    /// Fits the tallest peak and every peak chained to it within a few widths as a sum of Airy peaks with one common
    /// finesse (each with its own centre and height, one baseline); null when the blend spans too much of the period,
    /// has more than eight peaks, or the fit fails.
    /// </summary>
    public static PeakProfileFit? FitBlend(double[] freq, double[] sig, List<(double F, double Fwhm, double Height, double X)> peaks, double periodHz, double noise)
    {
        if (peaks.Count == 0) return null;
        var top = peaks.MaxBy(p => p.Height);
        var chain = new List<(double F, double Fwhm, double Height, double X)> { top };
        bool grown;
        do
        {
            grown = false;
            foreach (var p in peaks)
            {
                if (chain.Contains(p)) continue;
                if (chain.Any(c => Math.Abs(c.F - p.F) < (HalfWindowFwhm + 1.5) * Math.Max(c.Fwhm, p.Fwhm)) && p.Height > 0.03 * top.Height)
                {
                    chain.Add(p);
                    grown = true;
                }
            }
        } while (grown && chain.Count <= 8);

        if (chain.Count > 8) return null;
        var fwhm = Medians.Upper(chain.Select(c => c.Fwhm));
        var lo = chain.Min(c => c.F) - HalfWindowFwhm * fwhm;
        var hi = chain.Max(c => c.F) + HalfWindowFwhm * fwhm;
        if (hi - lo > 0.9 * periodHz || lo < freq.Min() || hi > freq.Max()) return null;
        var idx = Enumerable.Range(0, freq.Length).Where(i => freq[i] >= lo && freq[i] <= hi && double.IsFinite(sig[i])).ToArray();
        var k = chain.Count;
        if (idx.Length < 2 * k + 4) return null;
        var f = idx.Select(i => freq[i]).ToArray();
        var y = idx.Select(i => sig[i]).ToArray();
        var m = f.Length;
        var baseline0 = y.Min();

        var start = new double[2 * k + 2];
        var lower = new double[2 * k + 2];
        var upper = new double[2 * k + 2];
        for (var q = 0; q < k; q++)
        {
            start[2 * q] = chain[q].F;
            start[2 * q + 1] = Math.Max(chain[q].Height, 1e-12);
            lower[2 * q] = chain[q].F - fwhm;
            upper[2 * q] = chain[q].F + fwhm;
            lower[2 * q + 1] = 0;
            upper[2 * q + 1] = double.PositiveInfinity;
        }

        start[2 * k] = baseline0;
        lower[2 * k] = double.NegativeInfinity;
        upper[2 * k] = double.PositiveInfinity;
        start[2 * k + 1] = Math.Max(1.5, periodHz / fwhm);
        lower[2 * k + 1] = 1.0;
        upper[2 * k + 1] = 1e7;
        var result = LevenbergMarquardt.MinimiseResiduals(AirySum(f, y, k, periodHz, noise), start, m, LmSettings.Relative(100, 1e-9) with { Lower = lower, Upper = upper });
        var covariance = result.Covariance();
        var pr = result.P;
        if (covariance is null) return null;
        var reduced = result.ChiSquare / Math.Max(1, m - start.Length);
        var sigma = Math.Sqrt(Math.Max(0, covariance[2 * k + 1, 2 * k + 1]) * Math.Max(1, reduced));
        if (!double.IsFinite(sigma) || !(pr[2 * k + 1] > 1)) return null;
        // the profile record describes the tallest peak of the blend
        var tq = chain.IndexOf(top);
        var model = AirySumModel(pr, k, f, periodHz);
        return new PeakProfileFit(top.X, pr[2 * tq], pr[2 * tq + 1], pr[2 * k], pr[2 * k + 1], sigma, reduced, f.Select(v => v - pr[2 * tq]).ToArray(), y, model);
    }

    /// <summary>Whitened residuals (y − model)/σ and Jacobian of k Airy peaks on one baseline with one finesse at the
    /// frequencies <paramref name="f"/>: parameters (ν₁, A₁, …, ν_k, A_k, baseline, 𝓕), model b + Σ A_q/(1 + F sin²(π(f − ν_q)/P))
    /// with F = <see cref="Airy.CoefficientOfFinesse"/>(𝓕), ∂F/∂𝓕 = 8𝓕/π².</summary>
    private static ResidualFunction AirySum(double[] f, double[] y, int k, double periodHz, double noise) => (p, r, jac) =>
    {
        var fin = p[2 * k + 1];
        var kk = Airy.CoefficientOfFinesse(fin);
        var dk = 8 * fin / (Math.PI * Math.PI);
        for (var i = 0; i < f.Length; i++)
        {
            var model = p[2 * k];
            double dFin = 0;
            for (var q = 0; q < k; q++)
            {
                var phase = Math.PI * (f[i] - p[2 * q]) / periodHz;
                var sn = Math.Sin(phase);
                var cs = Math.Cos(phase);
                var d = 1 + kk * sn * sn;
                var a = p[2 * q + 1];
                model += a / d;
                if (jac is null) continue;
                jac[i, 2 * q] = a * kk * 2 * sn * cs * (Math.PI / periodHz) / (d * d) / noise;
                jac[i, 2 * q + 1] = 1 / d / noise;
                dFin += -a * sn * sn * dk / (d * d);
            }

            r[i] = (y[i] - model) / noise;
            if (jac is null) continue;
            jac[i, 2 * k] = 1 / noise;
            jac[i, 2 * k + 1] = dFin / noise;
        }
    };

    /// <summary>The model of <see cref="AirySum"/> at the frequencies <paramref name="f"/>.</summary>
    private static double[] AirySumModel(double[] p, int k, double[] f, double periodHz)
    {
        var kk = Airy.CoefficientOfFinesse(p[2 * k + 1]);
        return f.Select(v =>
        {
            var t = p[2 * k];
            for (var q = 0; q < k; q++)
            {
                var sn = Math.Sin(Math.PI * (v - p[2 * q]) / periodHz);
                t += p[2 * q + 1] / (1 + kk * sn * sn);
            }

            return t;
        }).ToArray();
    }

    /// <summary>Averages the fitted peaks on a common detuning grid (units of the fitted FWHM), normalised to height 1.</summary>
    public static InstrumentProfile? Profile(IReadOnlyList<PeakProfileFit> fits, double finesse, double periodHz, double noiseSigma)
    {
        if (fits.Count == 0) return null;
        const int bins = 61;
        var range = HalfWindowFwhm;
        var sum = new double[bins];
        var count = new int[bins];
        var noise2 = new double[bins];
        foreach (var p in fits)
        {
            var fwhm = Airy.ExactFwhm(periodHz, p.Finesse);
            for (var i = 0; i < p.DetuningHz.Length; i++)
            {
                var u = p.DetuningHz[i] / fwhm;
                var k = (int)Math.Round((u + range) / (2 * range) * (bins - 1));
                if (k < 0 || k >= bins) continue;
                sum[k] += (p.Measured[i] - p.Baseline) / p.Height;
                noise2[k] += (noiseSigma / p.Height) * (noiseSigma / p.Height);
                count[k]++;
            }
        }

        var centres = Enumerable.Range(0, bins).Select(k => -range + 2 * range * k / (bins - 1)).ToArray();
        var measured = new double[bins];
        var airy = new double[bins];
        var fwhmMean = Airy.ExactFwhm(periodHz, finesse);
        double dev = 0, odd = 0, expect = 0;
        var used = 0;
        for (var k = 0; k < bins; k++)
        {
            airy[k] = Airy.Transmission(centres[k] * fwhmMean, periodHz, finesse);
            measured[k] = count[k] > 0 ? sum[k] / count[k] : double.NaN;
            if (count[k] == 0) continue;
            dev += (measured[k] - airy[k]) * (measured[k] - airy[k]);
            expect += noise2[k] / count[k] / count[k];
            used++;
        }

        for (var k = 0; k < bins / 2; k++)
        {
            var j = bins - 1 - k;
            if (count[k] == 0 || count[j] == 0) continue;
            var o = 0.5 * (measured[k] - measured[j]);
            odd += o * o;
        }

        if (used == 0) return null;
        var rms = Math.Sqrt(dev / used);
        var oddRms = Math.Sqrt(odd / Math.Max(1, used / 2));
        var noiseRms = Math.Sqrt(expect / used);
        var airyShaped = !(rms > 0.03 && rms > 4 * noiseRms);
        return new InstrumentProfile(centres, measured, airy, rms, oddRms, noiseRms, airyShaped);
    }
}
