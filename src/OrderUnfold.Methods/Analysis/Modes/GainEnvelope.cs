namespace OrderUnfold.Analysis.Modes;

/// <summary>
/// The gain envelope: a Gaussian in linear power (a parabola in dB, here in nepers) fitted by weighted least squares
/// to the main-comb mode intensities against the mode index, and its conversion to Hz once the spacing is known.
/// </summary>
internal static class GainEnvelope
{
    /// <summary>Fits the envelope over <paramref name="modeLines"/> (input indices) at the mode indices <paramref name="kOf"/>.</summary>
    public static EnvelopeFit Fit(List<int> modeLines, int?[] kOf, IReadOnlyList<ModeInputLine> lines, double pMax)
    {
        var used = modeLines.Where(i => lines[i].Intensity > 0).ToList();
        if (used.Select(i => kOf[i]).Distinct().Count() < 3)
            return new EnvelopeFit(false, $"the envelope needs at least three modes but the comb has {used.Count}", used.Count);

        var x = used.Select(i => (double)kOf[i]!.Value).ToArray();
        var y = used.Select(i => Math.Log(lines[i].Intensity / pMax)).ToArray();
        var sigmas = used.Select(i => lines[i].IntensitySigma is > 0 ? lines[i].IntensitySigma / lines[i].Intensity : null).ToList();
        var sig = PolynomialFit.Weights(sigmas, out var filled);
        var fit = PolynomialFit.Fit(x, y, sig, 2);
        var (a, b, c) = (fit.Parameters[0], fit.Parameters[1], fit.Parameters[2]);
        if (!(c < 0))
            return new EnvelopeFit(false, "the mode intensities do not fall off on both sides (the fitted parabola in dB opens upwards): no envelope peak",
                used.Count, Basis: fit.Basis);

        var centre = -b / (2 * c);
        var fwhm = Math.Sqrt(-4 * Math.Log(2) / c);
        var peak = a - b * b / (4 * c);
        double? centreSigma = null, fwhmSigma = null;
        if (fit.Covariance is { } cov)
        {
            // Gradients: centre = −b/(2c): (0, −1/(2c), b/(2c²)); fwhm = √(−4 ln2 / c): (0, 0, fwhm/(−2c)).
            double[] gc = [0, -1 / (2 * c), b / (2 * c * c)];
            double[] gw = [0, 0, fwhm / (-2 * c)];
            centreSigma = Math.Sqrt(Quad(gc, cov));
            fwhmSigma = Math.Sqrt(Quad(gw, cov));
        }

        var within = centre >= x.Min() - 0.5 && centre <= x.Max() + 0.5;
        var message = $"Gaussian in power (parabola in dB) fitted to {used.Count} mode intensities" +
                      (filled ? "; modes without an intensity sigma got the median relative sigma" : "");
        return new EnvelopeFit(true, message, used.Count, centre, centreSigma, fwhm, fwhmSigma,
            PeakRelativeDb: peak * ModeLevels.DbPerNeper, Basis: fit.Basis, ReducedChiSquared: fit.ReducedChiSquared, CentreWithinModes: within);
    }

    /// <summary>The envelope's centre and FWHM in Hz under spacing <paramref name="s"/>, with their standard errors.</summary>
    public static EnvelopeFit InHertz(EnvelopeFit e, ModeSpacing s, CombFit comb, int sign)
    {
        var ck = e.CentreK!.Value;
        var centreHz = s.OriginHz + ck * s.SpacingHz;
        var fwhmHz = e.FwhmModes!.Value * s.SpacingHz;
        double? centreSigma = null, fwhmSigma = null;
        if (e.CentreKSigma is { } sck)
        {
            var so = comb.OriginSigmaHz ?? 0;
            var ss = s.SigmaHz ?? 0;
            var cos = (comb.OriginStepCovariance ?? 0) * sign;
            centreSigma = Math.Sqrt(Math.Max(0, so * so + ck * ck * ss * ss + 2 * ck * cos + s.SpacingHz * s.SpacingHz * sck * sck));
        }

        if (e.FwhmModesSigma is { } sw)
        {
            var ss = s.SigmaHz ?? 0;
            fwhmSigma = Math.Sqrt(s.SpacingHz * s.SpacingHz * sw * sw + e.FwhmModes.Value * e.FwhmModes.Value * ss * ss);
        }

        return e with { CentreHz = centreHz, CentreSigmaHz = centreSigma, FwhmHz = fwhmHz, FwhmSigmaHz = fwhmSigma };
    }

    private static double Quad(double[] g, double[,] cov)
    {
        var v = 0.0;
        for (var i = 0; i < g.Length; i++)
            for (var j = 0; j < g.Length; j++)
                v += g[i] * cov[i, j] * g[j];
        return Math.Max(0, v);
    }
}
