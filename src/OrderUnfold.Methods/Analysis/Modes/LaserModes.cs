using OrderUnfold.Units;

namespace OrderUnfold.Analysis.Modes;

/// <summary>
/// Longitudinal-mode analysis of a laser from its line list: comb fit (spacing, cavity length, irregularity,
/// a second family), mode count, side-mode suppression ratio, gain envelope, and the reading of folded
/// positions when only one cavity was used. The front door of the <c>OrderUnfold.Analysis.Modes</c> namespace.
/// </summary>
public static class LaserModes
{
    private const double DbPerNeper = 10 / 2.302585092994046; // 10 / ln 10

    /// <summary>Analyses a line list. Throws <see cref="InputException"/> for an unusable input or options.</summary>
    public static ModeAnalysis Analyze(ModeInput input, ModeAnalysisOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(input);
        options ??= new ModeAnalysisOptions();
        input.Validate();
        options.Validate();

        var notes = new List<string>();
        var lines = input.Lines;
        var positive = Enumerable.Range(0, lines.Count).Where(i => lines[i].Intensity > 0).ToList();
        if (positive.Count < lines.Count)
            notes.Add($"{lines.Count - positive.Count} line(s) with an intensity ≤ 0 were left out.");

        var main = positive.OrderByDescending(i => lines[i].Intensity).ThenBy(i => i).First();
        var pMax = lines[main].Intensity;
        double? fold = input.OrdersResolved ? null : input.FoldingFsrHz!.Value;

        // ---------------------------------------------------------------- comb search
        var pts = positive.Select(i => new CombPoint(i, fold is { } f ? Mod(lines[i].FrequencyHz, f) : lines[i].FrequencyHz,
            lines[i].FrequencySigmaHz is > 0 ? lines[i].FrequencySigmaHz : null, lines[i].Intensity)).ToList();
        var seed = positive.IndexOf(main);
        var match = CombSearch.Find(pts, seed, fold, options);

        var role = new LineRole[lines.Count];
        var kOf = new int?[lines.Count];
        var residual = new double?[lines.Count];
        for (var i = 0; i < lines.Count; i++) role[i] = lines[i].Intensity > 0 ? LineRole.OffComb : LineRole.Excluded;
        role[main] = LineRole.MainComb;
        kOf[main] = 0;

        CombFit? comb = null;
        CombState? state = null;
        var tooFewAfterTrim = false;
        if (match is not null && match.Members >= options.MinModesForComb)
        {
            (comb, state) = FitComb(match, pts, fold, options, notes);
            if (comb.MemberCount < options.MinModesForComb)
            {
                notes.Add($"No comb: after taking outliers off, {comb.MemberCount} line(s) remain, fewer than the {options.MinModesForComb} required.");
                comb = null;
                state = null;
                tooFewAfterTrim = true;
            }
        }

        if (comb is not null && state is not null)
        {
            for (var p = 0; p < pts.Count; p++)
            {
                if (state.K[p] == CombSearch.NotMember) continue;
                var i = pts[p].Line;
                role[i] = LineRole.MainComb;
                kOf[i] = state.K[p];
                residual[i] = state.Residual[p];
            }

            if (comb.MemberCount == 2 && positive.Count >= 3)
                notes.Add("Only two lines lie on a common comb: the spacing is just their difference and cannot be checked against other modes.");
        }
        else if (positive.Count >= 2 && !tooFewAfterTrim)
        {
            notes.Add(match is null
                ? "No comb: a spacing needs at least two lines."
                : $"No comb: the best comb holds {match.Members} line(s), fewer than the {options.MinModesForComb} required.");
        }

        // ---------------------------------------------------------------- spacing (and folded reading)
        FoldedReading? folded = null;
        ModeSpacing? spacing = null;
        var readFrequency = new double?[lines.Count];
        if (input.OrdersResolved)
        {
            for (var i = 0; i < lines.Count; i++) readFrequency[i] = lines[i].FrequencyHz;
            if (comb is not null)
                spacing = Spacing(comb.StepHz, comb.StepSigmaHz, comb.OriginHz, options.GroupIndex);
        }

        // ---------------------------------------------------------------- envelope (in mode index; Hz later)
        var envelopeK = comb is null
            ? new EnvelopeFit(false, "no comb: the envelope needs at least three modes on a comb", 1)
            : FitEnvelope(Enumerable.Range(0, lines.Count).Where(i => role[i] == LineRole.MainComb).ToList(), kOf, lines, pMax);

        if (!input.OrdersResolved && comb is not null && state is not null)
        {
            folded = ReadFolded(comb, fold!.Value, envelopeK, options, notes);
            if (folded.Chosen is { } chosen)
            {
                // Unfold under the chosen spacing: k runs with frequency; sign −1 reverses the folded order.
                var sign = chosen.Sign;
                for (var i = 0; i < lines.Count; i++)
                    if (role[i] == LineRole.MainComb) kOf[i] = sign * kOf[i]!.Value;
                var originHz = lines[main].FrequencyHz - (residual[main] ?? 0);
                for (var i = 0; i < lines.Count; i++)
                    if (role[i] == LineRole.MainComb)
                        readFrequency[i] = originHz + kOf[i]!.Value * chosen.SpacingHz + (residual[i] ?? 0);
                spacing = Spacing(chosen.SpacingHz, chosen.SigmaHz, originHz, options.GroupIndex);
                state = state with { Sign = sign };
                if (envelopeK.Fitted)
                    envelopeK = envelopeK with { CentreK = sign * envelopeK.CentreK };
            }
        }

        var envelope = envelopeK;
        if (envelope.Fitted && spacing is not null && comb is not null && state is not null)
            envelope = EnvelopeInHertz(envelope, spacing, comb, state.Sign);
        if (envelope.Fitted && !envelope.CentreWithinModes)
            notes.Add("The envelope centre lies outside the span of the modes: it is an extrapolation.");

        // ---------------------------------------------------------------- second family (resolved only)
        SecondFamily? second = null;
        if (comb is not null && input.OrdersResolved)
        {
            second = FindSecondFamily(pts, comb, options, role, kOf, residual, pMax);
        }
        else if (comb is not null && role.Count(r => r == LineRole.OffComb) >= 2)
        {
            notes.Add("A second mode family is looked for only when the orders are resolved.");
        }

        // ---------------------------------------------------------------- relative levels, count, SMSR
        var relDb = new double?[lines.Count];
        var relSigma = new double?[lines.Count];
        var mainRel = RelativeSigma(lines[main]);
        foreach (var i in positive)
        {
            relDb[i] = 10 * Math.Log10(lines[i].Intensity / pMax);
            if (i == main) relSigma[i] = 0;
            else if (RelativeSigma(lines[i]) is { } ri && mainRel is { } rm)
                relSigma[i] = DbPerNeper * Math.Sqrt(ri * ri + rm * rm);
        }

        const double LevelSlack = 1e-9;
        bool Within(int i) => relDb[i] is { } d && d >= -options.WithinDb - LevelSlack;
        var count = new ModeCount(options.WithinDb,
            positive.Count(Within),
            positive.Count(i => Within(i) && role[i] == LineRole.MainComb),
            positive.Count(i => Within(i) && role[i] == LineRole.SecondFamily),
            positive.Count(i => Within(i) && role[i] == LineRole.OffComb));

        var smsr = Smsr(lines, positive, main, role, kOf, input.DetectionLimit);
        if (smsr.SideLineIndex is { } side && role[side] == LineRole.OffComb)
            notes.Add("The SMSR is set by a line off the comb; if that line is spurious, the laser's SMSR is higher.");

        var offComb = role.Count(r => r == LineRole.OffComb);
        if (offComb > 0 && comb is not null)
            notes.Add($"{offComb} line(s) lie off the {(second is null ? "comb" : "two combs")}: spurious lines, or modes of another family.");
        if (comb is { MissingK.Count: > 0 })
            notes.Add($"No line at mode index {string.Join(", ", comb.MissingK.Select(k => (state!.Sign * k).ToString("+0;-0;0")))}: " +
                      "these modes are below the detection limit (or folded onto another line).");

        var result = new List<ModeLine>(lines.Count);
        for (var i = 0; i < lines.Count; i++)
        {
            var l = lines[i];
            result.Add(new ModeLine(i, l.FrequencyHz, l.FrequencySigmaHz, l.Intensity, l.IntensitySigma, l.Snr,
                relDb[i], relSigma[i], role[i], kOf[i], residual[i], readFrequency[i]));
        }

        // Report the comb's missing slots in the frame the lines use (k runs with frequency).
        if (comb is not null && state is { Sign: -1 })
            comb = comb with { MissingK = comb.MissingK.Select(k => -k).OrderBy(k => k).ToList(), FirstK = -comb.LastK, LastK = -comb.FirstK };

        return new ModeAnalysis(input.OrdersResolved, result, main, comb, spacing, second, count, smsr, envelope, folded,
            input.DetectionLimit, input.AbsoluteAnchorHz, notes);
    }

    // ==================================================================== comb

    /// <summary>Comb membership in canonical form, with the sign that maps folded to reported mode indices.</summary>
    private sealed record CombState(int[] K, double[] Residual, double VarOrigin, double VarStep, double CovOriginStep, int Sign = 1);

    private static (CombFit, CombState) FitComb(CombMatch m, List<CombPoint> pts, double? fold, ModeAnalysisOptions o, List<string> notes)
    {
        var k = (int[])m.K.Clone();
        var step = m.Step;
        var origin = m.Origin;
        if (fold is { } f)
        {
            // Canonical folded step in (0, F/2]: a step s and F − s describe the same points with k reversed.
            var s = Mod(step, f);
            if (s > f / 2)
            {
                s = f - s;
                for (var i = 0; i < k.Length; i++)
                    if (k[i] != CombSearch.NotMember) k[i] = -k[i];
            }

            step = s;
            origin = Mod(origin, f);
        }

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
            y = members.Select(i => origin + k[i] * step + WrapTo(pts[i].X - origin - k[i] * step, fold)).ToArray();
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
        var tolerances = members.Select(i => m.Tolerance[i]).OrderBy(t => t).ToArray();

        var originOut = fold is { } ff ? Mod(a, ff) : a;
        var comb = new CombFit(b, fit.Sigma(1), originOut, fit.Sigma(0), fit.Cov(0, 1), kMin, kMax, members.Count, missing,
            rms, maxAbs, fit.ReducedChiSquared, fit.Basis, changePerMode, changeSigma, fold is not null,
            tolerances[tolerances.Length / 2]);
        var state = new CombState(k, residual, fit.Cov(0, 0) ?? double.NaN, fit.Cov(1, 1) ?? double.NaN, fit.Cov(0, 1) ?? double.NaN);
        return (comb, state);
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

    private static ModeSpacing Spacing(double spacingHz, double? sigmaHz, double originHz, double? groupIndex)
    {
        var c = PhysicalConstants.SpeedOfLight;
        var optical = c / (2 * spacingHz);
        double? opticalSigma = sigmaHz is { } s ? optical * s / spacingHz : null;
        double? physical = groupIndex is { } n ? optical / n : null;
        double? physicalSigma = groupIndex is { } n2 && opticalSigma is { } os ? os / n2 : null;
        return new ModeSpacing(spacingHz, sigmaHz, originHz, optical, opticalSigma, groupIndex, physical, physicalSigma);
    }

    // ==================================================================== second family

    private static SecondFamily? FindSecondFamily(List<CombPoint> pts, CombFit comb, ModeAnalysisOptions o,
        LineRole[] role, int?[] kOf, double?[] residual, double pMax)
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

        if (best is null) return null;

        // Offset: weighted mean of (x − slot) over the members, unwrapped around the seed's phase.
        var phase0 = best[0].Phase;
        var slots = best.Select(t => Math.Floor((t.P.X - origin) / step - phase0 + 0.5)).ToArray();
        var offsets = best.Select((t, j) => t.P.X - (origin + slots[j] * step)).ToArray();
        var sig = PolynomialFit.Weights(best.Select(t => t.P.Sigma).ToList(), out _);
        double offset, varMean;
        if (sig is not null)
        {
            var w = sig.Select(s => 1 / (s * s)).ToArray();
            offset = offsets.Zip(w, (x, wi) => x * wi).Sum() / w.Sum();
            varMean = 1 / w.Sum();
            var chi = offsets.Zip(w, (x, wi) => (x - offset) * (x - offset) * wi).Sum();
            if (best.Count > 1 && chi / (best.Count - 1) > 1) varMean *= chi / (best.Count - 1);
        }
        else
        {
            offset = offsets.Average();
            varMean = offsets.Sum(x => (x - offset) * (x - offset)) / (best.Count - 1) / best.Count;
        }

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

    // ==================================================================== envelope

    private static EnvelopeFit FitEnvelope(List<int> modeLines, int?[] kOf, IReadOnlyList<ModeInputLine> lines, double pMax)
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
            PeakRelativeDb: peak * DbPerNeper, Basis: fit.Basis, ReducedChiSquared: fit.ReducedChiSquared, CentreWithinModes: within);
    }

    private static EnvelopeFit EnvelopeInHertz(EnvelopeFit e, ModeSpacing s, CombFit comb, int sign)
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

    // ==================================================================== SMSR

    private static double? RelativeSigma(ModeInputLine l) =>
        l.IntensitySigma is { } s && l.Intensity > 0 ? s / l.Intensity : null;

    private static SideModeSuppression Smsr(IReadOnlyList<ModeInputLine> lines, List<int> positive, int main, LineRole[] role, int?[] kOf, double? detectionLimit)
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

    // ==================================================================== folded positions

    private static FoldedReading ReadFolded(CombFit comb, double fsr, EnvelopeFit envelope, ModeAnalysisOptions o, List<string> notes)
    {
        var delta = comb.StepHz;
        var slotSpan = comb.LastK - comb.FirstK;
        var withinOne = slotSpan >= 1 && slotSpan * delta < fsr;
        var ranged = o.SpacingMinHz is not null || o.SpacingMaxHz is not null;
        var lo = o.SpacingMinHz ?? 0;
        var hi = o.SpacingMaxHz ?? double.PositiveInfinity;
        const int MaxCandidates = 200;

        var list = new List<SpacingCandidate>();
        var truncated = false;
        for (var j = 1; j <= o.FoldedMaxDivisor; j++)
        {
            int mFrom, mTo;
            if (ranged)
            {
                mFrom = Math.Max(0, (int)Math.Floor((j * lo - delta) / fsr));
                mTo = double.IsFinite(hi)
                    ? (int)Math.Ceiling((j * hi + delta) / fsr)
                    : mFrom + (j == 1 ? o.FoldedCandidatesListed : 1);
            }
            else
            {
                mFrom = 0;
                mTo = j == 1 ? o.FoldedCandidatesListed / 2 + 1 : 1;
            }

            for (var m = mFrom; m <= mTo; m++)
            {
                foreach (var sign in new[] { 1, -1 })
                {
                    var spacing = (m * fsr + sign * delta) / j;
                    if (!(spacing > 0)) continue;
                    var inRange = spacing >= lo && spacing <= hi;
                    if (ranged && !inRange) continue;
                    if (list.Any(c => c.Divisor == j && Math.Abs(c.SpacingHz - spacing) < 1e-9 * spacing)) continue;
                    if (list.Count >= MaxCandidates)
                    {
                        truncated = true;
                        continue;
                    }

                    var optical = PhysicalConstants.SpeedOfLight / (2 * spacing);
                    list.Add(new SpacingCandidate(spacing, comb.StepSigmaHz / j, m, sign, j, optical,
                        o.GroupIndex is { } n ? optical / n : null,
                        envelope.Fitted ? envelope.FwhmModes!.Value * spacing * j : null, inRange));
                }
            }
        }

        var primary = list.Where(c => c.Divisor == 1).OrderBy(c => c.SpacingHz).ToList();
        var extra = list.Where(c => c.Divisor > 1).OrderBy(c => c.SpacingHz).ToList();
        if (!ranged) primary = primary.Take(o.FoldedCandidatesListed).ToList();
        var candidates = primary.Concat(extra).OrderBy(c => c.SpacingHz).ToList();
        if (truncated) notes.Add($"More than {MaxCandidates} spacing candidates: only the first {MaxCandidates} are listed; narrow the spacing range.");

        var F = Quantity.FormatFrequency(fsr);
        var d = Quantity.FormatFrequency(delta);
        SpacingCandidate? chosen = null;
        string reason;
        if (ranged)
        {
            var inRange = primary.Where(c => c.InRange).ToList();
            var range = $"{(o.SpacingMinHz is { } a ? Quantity.FormatFrequency(a) : "0")} … {(o.SpacingMaxHz is { } b ? Quantity.FormatFrequency(b) : "∞")}";
            if (inRange.Count == 1)
            {
                chosen = inRange[0];
                reason = $"Δ = {Quantity.FormatFrequency(chosen.SpacingHz)} is the only candidate in the stated range {range} " +
                         "(taking neighbouring lines as neighbouring modes).";
            }
            else if (inRange.Count == 0)
            {
                reason = $"No candidate lies in the stated range {range}: check the range and the FSR.";
            }
            else
            {
                reason = $"{inRange.Count} candidates lie in the stated range {range}; one cavity cannot choose between them.";
            }
        }
        else if (withinOne && slotSpan >= 2)
        {
            chosen = primary.First(c => c.FsrMultiple == 0 && c.Sign == 1);
            reason = $"Read with spacing δ = {d}, all modes lie within one FSR ({F}); every other candidate would spread them over " +
                     "more than one FSR. If the laser's whole spectrum is known to be narrower than the FSR (one cavity cannot check " +
                     "this), the spacing is δ.";
        }
        else if (withinOne)
        {
            reason = $"Two modes within one FSR can be δ = {d} or FSR − δ = {Quantity.FormatFrequency(fsr - delta)} apart; one cavity cannot tell which.";
        }
        else
        {
            reason = $"The modes spread over more than one FSR ({F}), so the spacing is ambiguous; state a spacing range " +
                     "(--spacing-min/--spacing-max) if the laser's design bounds it.";
        }

        var ambiguity =
            $"One cavity sees a line only modulo its FSR ({F}), so it shows the mode spacing only modulo the FSR: δ = {d}. " +
            "Every spacing m·FSR + δ or m·FSR − δ folds the modes onto the same positions (the minus sign with the mode order " +
            "reversed), and so does (m·FSR ± δ)/j if only every j-th mode were above the detection limit.";

        double? suggested = null, separation = null;
        var distinct = primary.Select(c => c.Sign * c.FsrMultiple).Distinct().ToList();
        if (distinct.Count >= 2)
        {
            // Under candidate (m, sign) the next mode sits at δ + sign·m·FSR from the first: in a second cavity of FSR F2
            // two candidates differ there by (n_a − n_b)·FSR modulo F2. Pick F2 (0.6…1.4 FSR) maximising the smallest such distance.
            var diffs = new HashSet<int>();
            foreach (var p in distinct)
                foreach (var q in distinct)
                    if (p > q) diffs.Add(p - q);
            double bestF2 = double.NaN, bestSep = -1;
            const int Steps = 4000;
            for (var s = 0; s <= Steps; s++)
            {
                var f2 = fsr * (0.6 + 0.8 * s / Steps);
                if (Math.Abs(f2 - fsr) < 0.02 * fsr) continue;
                var sep = diffs.Min(n => Math.Abs(WrapTo(n * fsr, f2)));
                if (sep > bestSep)
                {
                    bestSep = sep;
                    bestF2 = f2;
                }
            }

            suggested = bestF2;
            separation = bestSep;
        }

        var second =
            $"A second cavity whose FSR is not a ratio of small whole numbers times {F} settles it: candidates that differ by " +
            "n·FSR put the neighbouring modes n·FSR apart, which a second cavity of FSR F2 sees as n·FSR modulo F2, a visible " +
            "shift unless n·FSR is close to a multiple of F2. Unfold both sweeps together and the orders are resolved.";
        if (suggested is { } f2s && separation is { } sp)
            second += $" For the candidates listed, an FSR of {Quantity.FormatFrequency(f2s)} would keep their neighbouring modes at least " +
                      $"{Quantity.FormatFrequency(sp)} apart; that must be several of its linewidths.";

        return new FoldedReading(fsr, delta, comb.StepSigmaHz, withinOne, candidates, chosen, reason, ambiguity, second, suggested, separation);
    }

    // ==================================================================== helpers

    private static double Mod(double x, double m)
    {
        var r = x % m;
        return r < 0 ? r + m : r;
    }

    private static double WrapTo(double d, double? f) => f is { } ff ? d - ff * Math.Round(d / ff) : d;
}
