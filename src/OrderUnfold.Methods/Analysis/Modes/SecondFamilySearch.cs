namespace OrderUnfold.Analysis.Modes;

/// <summary>
/// A second mode family (orders resolved only): lines off the main comb that share one phase along it, such as a
/// transverse family or a second polarisation, taken as a comb of the same spacing offset by a fraction of it.
/// </summary>
internal static class SecondFamilySearch
{
    /// <summary>
    /// Finds the largest group (ties: the strongest) of off-comb lines with a common phase; marks its members in
    /// <paramref name="role"/>, <paramref name="kOf"/> and <paramref name="residual"/>. Null when fewer than two
    /// off-comb lines share a phase.
    /// </summary>
    public static SecondFamily? Find(List<CombPoint> pts, CombFit comb, ModeAnalysisOptions o,
        LineRole[] role, int?[] kOf, double?[] residual, double pMax)
    {
        var step = comb.StepHz;
        var origin = comb.OriginHz;
        var best = LargestCommonPhaseGroup(pts, comb, o, role);
        if (best is null) return null;

        // Offset: weighted mean of (x − slot) over the members, unwrapped around the seed's phase.
        var phase0 = best[0].Phase;
        var slots = best.Select(t => Math.Floor((t.P.X - origin) / step - phase0 + 0.5)).ToArray();
        var offsets = best.Select((t, j) => t.P.X - (origin + slots[j] * step)).ToArray();
        var sig = PolynomialFit.Weights(best.Select(t => t.P.Sigma).ToList(), out _);
        var (offset, varMean) = MeanOffset(offsets, sig);

        // The comb's own uncertainty at the members' mean slot.
        var kBar = slots.Average();
        var varComb = (comb.OriginSigmaHz ?? 0) * (comb.OriginSigmaHz ?? 0) + kBar * kBar * (comb.StepSigmaHz ?? 0) * (comb.StepSigmaHz ?? 0)
                      + 2 * kBar * (comb.OriginStepCovariance ?? 0);
        var sigma = Math.Sqrt(Math.Max(0, varMean + varComb));
        double? sigmaOut = double.IsFinite(sigma) && (sig is not null || best.Count > 1) ? sigma : null;

        var offsetWrapped = offset - step * Math.Floor(offset / step);
        for (var j = 0; j < best.Count; j++)
        {
            var i = best[j].P.Line;
            role[i] = LineRole.SecondFamily;
            var slot = (int)(slots[j] + Math.Floor(offset / step));
            kOf[i] = slot;
            residual[i] = best[j].P.X - (origin + slot * step + offsetWrapped);
        }

        var strongest = best.Max(t => t.P.Intensity);
        return new SecondFamily(offsetWrapped / step, sigmaOut / step, offsetWrapped, sigmaOut, best.Count, 10 * Math.Log10(strongest / pMax));
    }

    /// <summary>The off-comb lines (away from every main slot) that share a phase along the comb, one per slot of the
    /// second comb (the strongest); the largest such group, ties going to the larger summed intensity.</summary>
    private static List<(CombPoint P, double Phase)>? LargestCommonPhaseGroup(List<CombPoint> pts, CombFit comb, ModeAnalysisOptions o, LineRole[] role)
    {
        var step = comb.StepHz;
        var origin = comb.OriginHz;
        double Tol(CombPoint p) => Math.Min(0.25 * step, Math.Max(o.CombToleranceFraction * step, p.Sigma is { } s ? o.SigmaTolerance * s : 0));

        // Outliers away from every main slot, with their phase in [0, 1) along the comb.
        var outliers = pts.Where(p => role[p.Line] == LineRole.OffComb).Select(p =>
        {
            var q = (p.X - origin) / step;
            var phase = q - Math.Floor(q);
            return (P: p, Phase: phase);
        }).Where(t => Math.Min(t.Phase, 1 - t.Phase) * step > Tol(t.P)).ToList();
        if (outliers.Count < 2) return null;

        List<(CombPoint P, double Phase)>? best = null;
        foreach (var (seedPoint, seedPhase) in outliers)
        {
            var group = outliers.Where(t =>
            {
                var d = Math.Abs(t.Phase - seedPhase);
                d = Math.Min(d, 1 - d) * step;
                return d <= Tol(t.P) + Tol(seedPoint);
            }).ToList();

            // One line per slot of the second comb: the strongest.
            group = group.GroupBy(t => (long)Math.Round((t.P.X - origin) / step - seedPhase))
                .Select(g => g.OrderByDescending(t => t.P.Intensity).First()).ToList();
            if (group.Count < 2) continue;
            if (best is null || group.Count > best.Count ||
                (group.Count == best.Count && group.Sum(t => t.P.Intensity) > best.Sum(t => t.P.Intensity)))
                best = group;
        }

        return best;
    }

    /// <summary>Weighted mean of the offsets and its variance, scaled up by the reduced χ² when the offsets scatter
    /// more than their sigmas say; without sigmas, the plain mean and the variance of the mean.</summary>
    private static (double Offset, double Variance) MeanOffset(double[] offsets, double[]? sig)
    {
        double offset, varMean;
        if (sig is not null)
        {
            var w = sig.Select(s => 1 / (s * s)).ToArray();
            offset = offsets.Zip(w, (x, wi) => x * wi).Sum() / w.Sum();
            varMean = 1 / w.Sum();
            var chi = offsets.Zip(w, (x, wi) => (x - offset) * (x - offset) * wi).Sum();
            if (offsets.Length > 1 && chi / (offsets.Length - 1) > 1) varMean *= chi / (offsets.Length - 1);
        }
        else
        {
            offset = offsets.Average();
            varMean = offsets.Sum(x => (x - offset) * (x - offset)) / (offsets.Length - 1) / offsets.Length;
        }

        return (offset, varMean);
    }
}
