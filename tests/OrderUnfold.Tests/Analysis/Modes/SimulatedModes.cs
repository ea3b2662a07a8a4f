using OrderUnfold.Analysis.Modes;

namespace OrderUnfold.Tests.Analysis.Modes;

/// <summary>
/// Simulated laser line lists for the mode tests (invented data, seeded): modes on a comb ν0 + k·Δ under a
/// Gaussian gain envelope, positions with Gaussian noise of a stated sigma, intensities with a stated
/// relative noise. Nothing here runs the unfold.
/// </summary>
internal static class SimulatedModes
{
    /// <summary>Speed of light, m/s, exact by the SI definition of the metre (BIPM SI Brochure, 9th ed., 2019).</summary>
    public const double C = 299_792_458.0;

    /// <summary>A standard normal deviate (Box–Muller).</summary>
    public static double Gauss(Random rng)
    {
        var u1 = 1.0 - rng.NextDouble();
        var u2 = rng.NextDouble();
        return Math.Sqrt(-2 * Math.Log(u1)) * Math.Cos(2 * Math.PI * u2);
    }

    /// <summary>Relative power of a Gaussian envelope with centre and FWHM given in mode indices.</summary>
    public static double Envelope(double k, double centreK, double fwhmModes) =>
        Math.Exp(-4 * Math.Log(2) * (k - centreK) * (k - centreK) / (fwhmModes * fwhmModes));

    /// <summary>
    /// Lines at ν0 + k·Δ for the given k, with power <paramref name="power"/>(k), position noise σ_f and
    /// relative intensity noise; each line carries its sigmas.
    /// </summary>
    public static List<ModeInputLine> Comb(double spacingHz, double originHz, IEnumerable<int> ks, Func<int, double> power,
        double frequencySigmaHz, double relativeIntensitySigma, Random rng)
    {
        var list = new List<ModeInputLine>();
        foreach (var k in ks)
        {
            var p = power(k);
            var f = originHz + k * spacingHz + frequencySigmaHz * Gauss(rng);
            var i = p * (1 + relativeIntensitySigma * Gauss(rng));
            list.Add(new ModeInputLine(f, frequencySigmaHz, i, relativeIntensitySigma * p, i / (relativeIntensitySigma * p)));
        }

        return list;
    }

    public static ModeInput Resolved(IEnumerable<ModeInputLine> lines, double? detectionLimit = 1e-3) =>
        new(lines.ToList(), detectionLimit, true, null, null);

    /// <summary>The same lines seen by one cavity of FSR <paramref name="fsrHz"/>: positions folded into [0, FSR).</summary>
    public static ModeInput Folded(IEnumerable<ModeInputLine> lines, double fsrHz, double? detectionLimit = 1e-3) =>
        new(lines.Select(l => l with { FrequencyHz = ((l.FrequencyHz % fsrHz) + fsrHz) % fsrHz }).ToList(), detectionLimit, false, fsrHz, null);
}
