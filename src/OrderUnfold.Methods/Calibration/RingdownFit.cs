namespace OrderUnfold.Calibration;

/// <summary>One peak fitted with the swept-cavity model of <see cref="RingdownModel"/> (all times in samples of the sweep).</summary>
/// <param name="Crossing">Sample (fractional) at which the sweep crosses the resonance, t₀.</param>
/// <param name="CrossingSigma">Standard error of <paramref name="Crossing"/>, samples.</param>
/// <param name="Maximum">Sample of the largest value of the fitted response (where the measured peak has its top).</param>
/// <param name="Amplitude">Static peak height (the height a slow sweep would show), signal units.</param>
/// <param name="Background">Constant background under the peak, signal units.</param>
/// <param name="Tau">Field (amplitude) 1/e decay time τ, samples.</param>
/// <param name="TauSigma">Standard error of τ, samples (NaN when τ was held fixed).</param>
/// <param name="Rate">Sweep rate |r| at the crossing, cycles per sample².</param>
/// <param name="RateSigma">Standard error of |r|.</param>
/// <param name="ReducedChiSquare">χ² per degree of freedom with the sweep's noise σ.</param>
/// <param name="StaticChiSquareRatio">χ² of the best static (Lorentzian) fit over χ² of this fit on the same window (≫ 1: the dynamics show).</param>
/// <param name="MeasuredFwhm">FWHM of the measured (dynamic) peak, samples: what a static reading of the width would use.</param>
/// <param name="WindowStart">First sample of the fitted window.</param>
/// <param name="WindowCount">Samples in the fitted window.</param>
/// <param name="TauFixed">True when τ was held at the sweep's common value (a weak peak).</param>
/// <param name="Converged">Whether the Levenberg–Marquardt iteration converged.</param>
public sealed record RingdownPeakFit(double Crossing, double CrossingSigma, double Maximum, double Amplitude, double Background, double Tau, double TauSigma,
    double Rate, double RateSigma, double ReducedChiSquare, double StaticChiSquareRatio, double MeasuredFwhm, int WindowStart, int WindowCount, bool TauFixed, bool Converged)
{
    /// <summary>π²·r·τ²: sweep rate over linewidth squared.</summary>
    public double Dynamics => RingdownModel.Dynamics(Tau, Rate);

    /// <summary>Delay of the peak's top after the resonance crossing, samples.</summary>
    public double Delay => Maximum - Crossing;

    /// <summary>FWHM of the static response at this sweep rate, samples (linewidth / rate).</summary>
    public double StaticFwhm => RingdownModel.StaticFwhmSamples(Tau, Rate);
}

/// <summary>
/// Least-squares fit of one peak with the swept-cavity response: y = b + A·|b(t; t₀, τ, r)|², with A, t₀, τ, r and the
/// background free (τ optionally fixed), by Levenberg–Marquardt (<see cref="LevenbergMarquardt"/>) on the sample
/// grid of a window around the peak. Starting values come from the measured width and top of the peak matched to
/// a table of response shapes over a ladder of π²rτ² (the best of the ladder by χ² starts the iteration). The cost is
/// bounded: a window of at most <see cref="MaxWindow"/> samples and at most <see cref="MaxIterations"/> iterations.
/// </summary>
public static class RingdownFit
{
    /// <summary>Most samples one peak's ring-down fit looks at.</summary>
    public const int MaxWindow = 1200;
    /// <summary>Most Levenberg–Marquardt iterations per peak.</summary>
    public const int MaxIterations = 40;

    /// <summary>Measured top, height above <paramref name="baseline"/> and FWHM (samples) of the peak whose top is at or near <paramref name="top"/>.</summary>
    public static (int Top, double Height, double Fwhm) Measure(double[] y, int top, double baseline)
    {
        var h = y[top] - baseline;
        var half = baseline + 0.5 * h;
        var lo = top;
        while (lo > 0 && y[lo - 1] > half) lo--;
        var hi = top;
        while (hi < y.Length - 1 && y[hi + 1] > half) hi++;
        var left = lo > 0 ? lo - 1 + (half - y[lo - 1]) / (y[lo] - y[lo - 1]) : lo;
        var right = hi < y.Length - 1 ? hi + (y[hi] - half) / (y[hi] - y[hi + 1]) : hi;
        return (top, h, Math.Max(1, right - left));
    }

    /// <summary>The window [start, end) fitted around a peak of measured FWHM <paramref name="fwhm"/> at <paramref name="top"/>.</summary>
    public static (int Start, int End) Window(int n, int top, double fwhm, int? limitLeft = null, int? limitRight = null)
    {
        var before = (int)Math.Ceiling(4 * fwhm) + 6;
        var after = (int)Math.Ceiling(8 * fwhm) + 10;
        var total = before + after;
        if (total > MaxWindow)
        {
            before = MaxWindow * before / total;
            after = MaxWindow - before;
        }

        var start = Math.Max(limitLeft ?? 0, Math.Max(0, top - before));
        var end = Math.Min(limitRight ?? n, Math.Min(n, top + after));
        return (start, end);
    }

    /// <summary>
    /// Fits the peak whose top is near sample <paramref name="top"/> over [start, end) of <paramref name="y"/>.
    /// Null when the window is too short or the fit fails numerically.
    /// </summary>
    /// <param name="y">Signal (time order).</param>
    /// <param name="start">First sample of the window.</param>
    /// <param name="end">One past the last sample.</param>
    /// <param name="top">Sample of the measured top.</param>
    /// <param name="fwhm">Measured FWHM, samples.</param>
    /// <param name="noise">Noise σ of the signal.</param>
    /// <param name="fixedTau">When set, τ is held at this value (samples).</param>
    public static RingdownPeakFit? Fit(double[] y, int start, int end, int top, double fwhm, double noise, double? fixedTau = null)
    {
        var m = end - start;
        if (m < 12) return null;
        var sigma = Math.Max(noise, 1e-12);
        var window = new ReadOnlySpan<double>(y, start, m).ToArray();
        var bg0 = Edge(window);
        var height = y[top] - bg0;
        if (!(height > 0)) return null;
        var model = new double[m];

        var best = StartingValues(window, model, start, top, fwhm, fixedTau, height, bg0);
        var tauFree = fixedTau is null;
        var idx = tauFree ? new[] { 0, 1, 2, 3, 4 } : new[] { 0, 1, 3, 4 };
        var full = (double[])best.Clone();
        double[] Expand(double[] q)
        {
            var p = (double[])full.Clone();
            for (var k = 0; k < idx.Length; k++) p[idx[k]] = q[k];
            return p;
        }

        var shift = new double[m];
        void Evaluate(double[] q, double[] residual, double[,]? jacobian)
        {
            var p = Expand(q);
            RingdownModel.Power(model, start, p[1], Math.Exp(p[2]), Math.Exp(p[3]));
            for (var i = 0; i < m; i++) residual[i] = (window[i] - p[4] - p[0] * model[i]) / sigma;
            if (jacobian is null) return;
            for (var k = 0; k < idx.Length; k++)
            {
                var j = idx[k];
                if (j == 0)
                {
                    for (var i = 0; i < m; i++) jacobian[i, k] = model[i] / sigma;
                    continue;
                }

                if (j == 4)
                {
                    for (var i = 0; i < m; i++) jacobian[i, k] = 1 / sigma;
                    continue;
                }

                var step = j == 1 ? 1e-3 * Math.Max(1, Math.Exp(p[2])) : 1e-4;
                var pp = (double[])p.Clone();
                pp[j] += step;
                RingdownModel.Power(shift, start, pp[1], Math.Exp(pp[2]), Math.Exp(pp[3]));
                for (var i = 0; i < m; i++) jacobian[i, k] = p[0] * (shift[i] - model[i]) / step / sigma;
            }
        }

        var q0 = idx.Select(j => best[j]).ToArray();
        var lower = idx.Select(j => j switch { 0 => 0.0, 1 => start - 0.5 * m, 2 => Math.Log(0.05), 3 => Math.Log(1e-9), _ => double.NegativeInfinity }).ToArray();
        var upper = idx.Select(j => j switch { 0 => double.PositiveInfinity, 1 => end + 0.5 * m, 2 => Math.Log(10.0 * m), 3 => Math.Log(0.5), _ => double.PositiveInfinity }).ToArray();
        var result = LevenbergMarquardt.MinimiseResiduals(Evaluate, q0, m, LmSettings.Relative(MaxIterations, 1e-7) with { Lower = lower, Upper = upper });
        var covariance = result.Covariance();
        var p = Expand(result.P);
        if (!p.All(double.IsFinite)) return null;
        var dof = Math.Max(1, m - idx.Length);
        var reduced = result.ChiSquare / dof;
        var scale = Math.Sqrt(Math.Max(1, reduced));
        double Se(int j)
        {
            var k = Array.IndexOf(idx, j);
            if (k < 0 || covariance is null) return double.NaN;
            var v = covariance[k, k];
            return v >= 0 ? Math.Sqrt(v) * scale : double.NaN;
        }

        var tauFit = Math.Exp(p[2]);
        var rateFit = Math.Exp(p[3]);
        RingdownModel.Power(model, start, p[1], tauFit, rateFit);
        var maxAt = 0;
        for (var i = 1; i < m; i++) if (model[i] > model[maxAt]) maxAt = i;
        var staticChi = StaticChiSquare(window, start, top, fwhm, sigma);
        return new RingdownPeakFit(p[1], Se(1), start + Refine(model, maxAt), p[0], p[4], tauFit, tauFree ? tauFit * Se(2) : double.NaN, rateFit, rateFit * Se(3),
            reduced, staticChi / Math.Max(result.ChiSquare, 1e-300), fwhm, start, m, !tauFree, result.Converged);
    }

    /// <summary>Starting values (A, crossing, ln τ, ln rate, b): the shape ladder matched to the measured width and top, A and b
    /// by linear least squares; with τ fixed and no ladder entry near, from the width alone.</summary>
    private static double[] StartingValues(double[] window, double[] model, int start, int top, double fwhm, double? fixedTau, double height, double bg0)
    {
        double bestChi = double.PositiveInfinity;
        double[]? best = null;
        foreach (var shape in RingdownModel.Shapes)
        {
            var tau = fixedTau ?? fwhm / shape.FwhmTau;
            var rate = fixedTau is double ft
                ? RateForWidth(ft, fwhm)
                : shape.Dynamics / (Math.PI * Math.PI * tau * tau);
            if (fixedTau is not null && Math.Abs(RingdownModel.Dynamics(tau, rate) / shape.Dynamics - 1) > 0.5) continue;
            var crossing = top - shape.DelayTau * tau;
            RingdownModel.Power(model, start, crossing, tau, rate);
            var (a, b, chi) = Linear(window, model);
            if (chi < bestChi && a > 0)
            {
                bestChi = chi;
                best = [a, crossing, Math.Log(tau), Math.Log(rate), b];
            }
        }

        if (best is null)
        {
            // τ fixed and no ladder entry near: start from the width alone
            var tau = fixedTau!.Value;
            best = [height / 0.5, top - 0.5 * tau, Math.Log(tau), Math.Log(RateForWidth(tau, fwhm)), bg0];
        }

        return best;
    }

    /// <summary>Sweep rate at which a resonance of field decay time τ shows a static FWHM of <paramref name="fwhm"/> samples.</summary>
    private static double RateForWidth(double tau, double fwhm) => 1 / (Math.PI * tau * Math.Max(fwhm, 0.5));

    /// <summary>χ² (whitened) of the best static Lorentzian (centre, FWHM, height, background) on the window.</summary>
    public static double StaticChiSquare(double[] window, int start, int top, double fwhm, double sigma)
    {
        var m = window.Length;
        var shape = new double[m];
        void Evaluate(double[] p, double[] residual, double[,]? jacobian)
        {
            var w = Math.Exp(p[2]);
            for (var i = 0; i < m; i++)
            {
                shape[i] = RingdownModel.Lorentzian(start + i, p[1], w);
                residual[i] = (window[i] - p[3] - p[0] * shape[i]) / sigma;
            }

            if (jacobian is null) return;
            for (var i = 0; i < m; i++)
            {
                var u = 2 * (start + i - p[1]) / w;
                var l = shape[i];
                jacobian[i, 0] = l / sigma;
                // ∂L/∂c = L²·(8(n − c)/w²); ∂L/∂ln w = L²·2u²
                jacobian[i, 1] = p[0] * l * l * 4 * u / w / sigma;
                jacobian[i, 2] = p[0] * l * l * 2 * u * u / sigma;
                jacobian[i, 3] = 1 / sigma;
            }
        }

        var bg = Edge(window);
        var start0 = new[] { window[top - start] - bg, (double)top, Math.Log(Math.Max(fwhm, 0.5)), bg };
        return LevenbergMarquardt.MinimiseResiduals(Evaluate, start0, m, LmSettings.Relative(MaxIterations, 1e-7)).ChiSquare;
    }

    /// <summary>A + b by linear least squares of y ≈ A·model + b; returns A, b and the (unwhitened) χ².</summary>
    private static (double A, double B, double Chi) Linear(double[] y, double[] model)
    {
        if (!GainFit.TryFit(model, y, out var a, out var b)) return (0, b, double.PositiveInfinity);
        var chi = 0.0;
        for (var i = 0; i < y.Length; i++)
        {
            var r = y[i] - a * model[i] - b;
            chi += r * r;
        }

        return (a, b, chi);
    }

    /// <summary>Background estimate: the median of the first and last eighth of the window.</summary>
    private static double Edge(double[] w)
    {
        var k = Math.Max(2, w.Length / 8);
        return Medians.Upper(w.Take(k).Concat(w.Skip(w.Length - k)));
    }

    /// <summary>Sub-sample position of a maximum by a three-point parabola.</summary>
    private static double Refine(double[] v, int i)
    {
        if (i <= 0 || i >= v.Length - 1) return i;
        var den = v[i - 1] - 2 * v[i] + v[i + 1];
        return den < 0 ? i + 0.5 * (v[i - 1] - v[i + 1]) / den : i;
    }
}
