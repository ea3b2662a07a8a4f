namespace OrderUnfold.Analysis.Modes;

/// <summary>Levels of the lines relative to the strongest: dB values with their sigmas, the count within a level, and the
/// side-mode suppression ratio.</summary>
internal static class ModeLevels
{
    /// <summary>dB per neper of power: 10 / ln 10.</summary>
    public const double DbPerNeper = 10 / 2.302585092994046;

    /// <summary>Relative standard uncertainty of a line's intensity, when known.</summary>
    public static double? RelativeSigma(ModeInputLine l) =>
        l.IntensitySigma is { } s && l.Intensity > 0 ? s / l.Intensity : null;

    /// <summary>Slack on the level comparison of <see cref="Count"/>, so that a line exactly at the level counts.</summary>
    private const double LevelSlack = 1e-9;

    /// <summary>Each line's level relative to the strongest (<paramref name="main"/>), dB, and its standard uncertainty
    /// from the two intensity sigmas (0 for the strongest itself); null for lines left out or without sigmas.</summary>
    public static (double?[] RelativeDb, double?[] RelativeSigmaDb) Relative(IReadOnlyList<ModeInputLine> lines, List<int> positive, int main)
    {
        var relDb = new double?[lines.Count];
        var relSigma = new double?[lines.Count];
        var pMax = lines[main].Intensity;
        var mainRel = RelativeSigma(lines[main]);
        foreach (var i in positive)
        {
            relDb[i] = 10 * Math.Log10(lines[i].Intensity / pMax);
            if (i == main) relSigma[i] = 0;
            else if (RelativeSigma(lines[i]) is { } ri && mainRel is { } rm)
                relSigma[i] = DbPerNeper * Math.Sqrt(ri * ri + rm * rm);
        }

        return (relDb, relSigma);
    }

    /// <summary>The lines within <paramref name="withinDb"/> of the strongest, in total and by role.</summary>
    public static ModeCount Count(double withinDb, List<int> positive, double?[] relDb, LineRole[] role)
    {
        bool Within(int i) => relDb[i] is { } d && d >= -withinDb - LevelSlack;
        return new ModeCount(withinDb,
            positive.Count(Within),
            positive.Count(i => Within(i) && role[i] == LineRole.MainComb),
            positive.Count(i => Within(i) && role[i] == LineRole.SecondFamily),
            positive.Count(i => Within(i) && role[i] == LineRole.OffComb));
    }

    /// <summary>SMSR: the strongest line over the next strongest of all other lines; without another line, a lower
    /// bound from the detection limit, or unbounded.</summary>
    public static SideModeSuppression Smsr(IReadOnlyList<ModeInputLine> lines, List<int> positive, int main, LineRole[] role, int?[] kOf, double? detectionLimit)
    {
        var others = positive.Where(i => i != main).OrderByDescending(i => lines[i].Intensity).ThenBy(i => i).ToList();
        if (others.Count > 0)
        {
            var side = others[0];
            var value = 10 * Math.Log10(lines[main].Intensity / lines[side].Intensity);
            double? sigma = RelativeSigma(lines[main]) is { } rm && RelativeSigma(lines[side]) is { } rs
                ? DbPerNeper * Math.Sqrt(rm * rm + rs * rs)
                : null;
            var what = role[side] switch
            {
                LineRole.MainComb => $"mode k = {kOf[side]:+0;-0;0}",
                LineRole.SecondFamily => "a line of the second family",
                _ => "a line off the comb",
            };
            return new SideModeSuppression(SmsrKind.Measured, value, sigma, main, side,
                $"10·log10 of the strongest line over the next strongest, {what} at {Quantity.FormatFrequency(lines[side].FrequencyHz - lines[main].FrequencyHz)} from it");
        }

        if (detectionLimit is { } d)
        {
            return new SideModeSuppression(SmsrKind.LowerBound, 10 * Math.Log10(1 / d), null, main, null,
                $"no other line was seen; any side mode is below the detection limit ({d:G3} of the strongest), so SMSR ≥ 10·log10(1/{d:G3})");
        }

        return new SideModeSuppression(SmsrKind.Unbounded, null, null, main, null,
            "no other line was seen and the detection limit is unknown: the SMSR cannot be bounded");
    }
}
