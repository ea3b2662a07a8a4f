namespace OrderUnfold.Analysis.Modes;

/// <summary>Comb membership in canonical form, with the sign that maps folded to reported mode indices.</summary>
/// <param name="K">Mode index of each comb point, or <see cref="CombSearch.NotMember"/>.</param>
/// <param name="Residual">Residual of each member from the fitted comb, Hz (0 for non-members).</param>
/// <param name="VarOrigin">Variance of the fitted origin.</param>
/// <param name="VarStep">Variance of the fitted step.</param>
/// <param name="CovOriginStep">Covariance of origin and step.</param>
/// <param name="Sign">+1, or −1 when a folded reading reverses the mode order.</param>
internal sealed record CombState(int[] K, double[] Residual, double VarOrigin, double VarStep, double CovOriginStep, int Sign = 1);

/// <summary>
/// The straight-line fit of the comb ν_k = ν₀ + k·Δ to the members a <see cref="CombSearch"/> found (weighted by the
/// line sigmas), with members far outside the scatter of the others taken off, and the comb's irregularity from a
/// quadratic term. Folded positions are fitted in canonical form: the folded step in (0, F/2].
/// </summary>
internal static class CombFitter
{
    /// <summary>Fits the comb of <paramref name="m"/>; notes what was filled in or taken off.</summary>
    public static (CombFit, CombState) Fit(CombMatch m, List<CombPoint> pts, double? fold, ModeAnalysisOptions o, List<string> notes)
    {
        var (k, step, origin) = CanonicalForm(m, fold);
        var seed = Array.IndexOf(k, 0);
        List<int> members;
        double[] kx, y;
        double[]? sig;
        bool filled;
        PolynomialFit.Result fit;
        var trimmed = 0;
        while (true)
        {
            members = Enumerable.Range(0, pts.Count).Where(i => k[i] != CombSearch.NotMember).ToList();
            kx = members.Select(i => (double)k[i]).ToArray();
            // Lifted positions: the slot plus the wrapped residual (identical to the position when not folded).
            y = members.Select(i => origin + k[i] * step + FoldArithmetic.WrapTo(pts[i].X - origin - k[i] * step, fold)).ToArray();
            sig = PolynomialFit.Weights(members.Select(i => pts[i].Sigma).ToList(), out filled);
            fit = PolynomialFit.Fit(kx, y, sig, 1);
            var worst = WorstOutlier(members, kx, y, sig, seed, step);
            if (worst < 0) break;
            k[members[worst]] = CombSearch.NotMember;
            trimmed++;
        }

        if (filled) notes.Add("Some lines have no frequency sigma; the comb fit gives them the median sigma of the others.");
        if (trimmed > 0)
            notes.Add($"{trimmed} line(s) within the comb tolerance but far outside the scatter of the other modes were taken off the comb.");
        var a = fit.Parameters[0];
        var b = fit.Parameters[1];
        var residual = new double[pts.Count];
        for (var j = 0; j < members.Count; j++) residual[members[j]] = fit.Residuals[j];

        double? changePerMode = null, changeSigma = null;
        if (members.Count >= 4 && kx.Distinct().Count() >= 3)
        {
            var quad = PolynomialFit.Fit(kx, y, sig, 2);
            changePerMode = 2 * quad.Parameters[2];
            changeSigma = quad.Sigma(2) * 2;
        }

        var kMin = members.Min(i => k[i]);
        var kMax = members.Max(i => k[i]);
        var present = members.Select(i => k[i]).ToHashSet();
        var missing = Enumerable.Range(kMin, kMax - kMin + 1).Where(x => !present.Contains(x)).ToList();
        var rms = Math.Sqrt(fit.Residuals.Average(r => r * r));
        var maxAbs = fit.Residuals.Max(Math.Abs);

        var originOut = fold is { } ff ? FoldArithmetic.Mod(a, ff) : a;
        var comb = new CombFit(b, fit.Sigma(1), originOut, fit.Sigma(0), fit.Cov(0, 1), kMin, kMax, members.Count, missing,
            rms, maxAbs, fit.ReducedChiSquared, fit.Basis, changePerMode, changeSigma, fold is not null,
            Medians.Upper(members.Select(i => m.Tolerance[i])));
        var state = new CombState(k, residual, fit.Cov(0, 0) ?? double.NaN, fit.Cov(1, 1) ?? double.NaN, fit.Cov(0, 1) ?? double.NaN);
        return (comb, state);
    }

    /// <summary>The match's mode indices, step and origin; folded, in canonical form: the step in (0, F/2] and the origin
    /// in [0, F) (a step s and F − s describe the same points with k reversed).</summary>
    private static (int[] K, double Step, double Origin) CanonicalForm(CombMatch m, double? fold)
    {
        var k = (int[])m.K.Clone();
        if (fold is not { } f) return (k, m.Step, m.Origin);
        var s = FoldArithmetic.Mod(m.Step, f);
        if (s > f / 2)
        {
            s = f - s;
            for (var i = 0; i < k.Length; i++)
                if (k[i] != CombSearch.NotMember) k[i] = -k[i];
        }

        return (k, s, FoldArithmetic.Mod(m.Origin, f));
    }

    /// <summary>
    /// The member (never the strongest line) that lies far off the comb drawn through the others: for each
    /// member the comb is refitted without it, and its residual from that comb, in line sigmas (or in Hz without
    /// sigmas), is divided by the scatter of the others (root of their reduced χ², at least 1 with sigmas) and by
    /// √(1 + leverage). The worst member is returned when this exceeds 6 and, when the scatter rather than the
    /// sigmas sets the scale, its two-sided Student-t tail probability (others' degrees of freedom) is below
    /// 0.001/n; −1 when no member does, or only three are left. A smoothly irregular comb
    /// (dispersion) has a large scatter and loses nobody; a spurious line that happens to lie within the
    /// membership tolerance does, even when it pulls the comb towards itself.
    /// </summary>
    private static int WorstOutlier(List<int> members, double[] kx, double[] y, double[]? sig, int seed, double step)
    {
        var n = members.Count;
        if (n <= 3) return -1;
        var worst = -1;
        var worstT = 0.0;
        for (var j = 0; j < n; j++)
        {
            if (members[j] == seed) continue;
            var keep = Enumerable.Range(0, n).Where(i => i != j).ToArray();
            var kk = keep.Select(i => kx[i]).ToArray();
            if (kk.Distinct().Count() < 2) continue;
            var fit = PolynomialFit.Fit(kk, keep.Select(i => y[i]).ToArray(), sig is null ? null : keep.Select(i => sig[i]).ToArray(), 1);
            var predicted = fit.Parameters[0] + fit.Parameters[1] * kx[j];
            var u = (y[j] - predicted) / (sig is null ? 1 : sig[j]);
            var dof = keep.Length - 2;
            var others = keep.Select((i, m) => fit.Residuals[m] / (sig is null ? 1 : sig[i])).ToArray();
            var scatter = Math.Sqrt(others.Sum(v => v * v) / Math.Max(1, dof));
            var kBar = kk.Average();
            var sxx = kk.Sum(v => (v - kBar) * (v - kBar));
            var leverage = 1.0 / kk.Length + (kx[j] - kBar) * (kx[j] - kBar) / sxx;
            // With sigmas and no excess scatter the sigmas set the scale; otherwise the scatter does, and the
            // residual must also be improbable under Student's t for the others' degrees of freedom.
            var bySigmas = sig is not null && scatter <= 1;
            var scale = bySigmas ? 1.0 : Math.Max(scatter, sig is null ? 1e-9 * Math.Abs(step) : 1.0);
            var t = Math.Abs(u) / (scale * Math.Sqrt(1 + leverage));
            if (t <= 6) continue;
            if (!bySigmas)
            {
                if (dof < 1) continue;
                var tail = 2 * (1 - MathNet.Numerics.Distributions.StudentT.CDF(0, 1, dof, t));
                if (!(tail < 0.001 / n)) continue;
            }

            if (t > worstT)
            {
                worst = j;
                worstT = t;
            }
        }

        return worst;
    }
}
