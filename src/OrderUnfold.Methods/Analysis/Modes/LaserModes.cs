namespace OrderUnfold.Analysis.Modes;

/// <summary>
/// Longitudinal-mode analysis of a laser from its line list: comb fit (spacing, cavity length, irregularity,
/// a second family), mode count, side-mode suppression ratio, gain envelope, and the reading of folded
/// positions when only one cavity was used. The front door of the <c>OrderUnfold.Analysis.Modes</c> namespace.
/// The stages live in <see cref="CombSearch"/>, <see cref="CombFitter"/>, <see cref="FoldedSpacingReader"/>,
/// <see cref="GainEnvelope"/>, <see cref="SecondFamilySearch"/> and <see cref="ModeLevels"/>.
/// </summary>
public static class LaserModes
{
    /// <summary>What the stages have decided about each input line so far (indices are input indices).</summary>
    private sealed class LineAssignment
    {
        public LineAssignment(IReadOnlyList<ModeInputLine> lines, int main)
        {
            Role = new LineRole[lines.Count];
            K = new int?[lines.Count];
            Residual = new double?[lines.Count];
            ReadFrequency = new double?[lines.Count];
            for (var i = 0; i < lines.Count; i++) Role[i] = lines[i].Intensity > 0 ? LineRole.OffComb : LineRole.Excluded;
            Role[main] = LineRole.MainComb;
            K[main] = 0;
        }

        public LineRole[] Role { get; }
        public int?[] K { get; }
        public double?[] Residual { get; }
        public double?[] ReadFrequency { get; }

        public List<int> MainComb() => Enumerable.Range(0, Role.Length).Where(i => Role[i] == LineRole.MainComb).ToList();
    }

    /// <summary>Analyses a line list. Throws <see cref="InputException"/> for an unusable input or options.</summary>
    public static ModeAnalysis Analyse(ModeInput input, ModeAnalysisOptions? options = null)
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
        var pts = positive.Select(i => new CombPoint(i, fold is { } f ? FoldArithmetic.Mod(lines[i].FrequencyHz, f) : lines[i].FrequencyHz,
            lines[i].FrequencySigmaHz is > 0 ? lines[i].FrequencySigmaHz : null, lines[i].Intensity)).ToList();
        var assigned = new LineAssignment(lines, main);
        var (comb, state) = FitMainComb(pts, positive.Count, positive.IndexOf(main), fold, options, assigned, notes);

        // Spacing: directly when the orders are resolved; from the folded reading when one cavity chose one.
        FoldedReading? folded = null;
        ModeSpacing? spacing = null;
        if (input.OrdersResolved)
        {
            for (var i = 0; i < lines.Count; i++) assigned.ReadFrequency[i] = lines[i].FrequencyHz;
            if (comb is not null)
                spacing = Spacing(comb.StepHz, comb.StepSigmaHz, comb.OriginHz, options.GroupIndex);
        }

        // The envelope is fitted in mode index first; in Hz once the spacing is known.
        var envelope = comb is null
            ? new EnvelopeFit(false, "no comb: the envelope needs at least three modes on a comb", 1)
            : GainEnvelope.Fit(assigned.MainComb(), assigned.K, lines, pMax);
        if (!input.OrdersResolved && comb is not null && state is not null)
            (folded, spacing, state, envelope) = ReadFolded(comb, state, fold!.Value, envelope, lines[main], main, assigned, options, notes);
        if (envelope.Fitted && spacing is not null && comb is not null && state is not null)
            envelope = GainEnvelope.InHertz(envelope, spacing, comb, state.Sign);
        if (envelope.Fitted && !envelope.CentreWithinModes)
            notes.Add("The envelope centre lies outside the span of the modes: it is an extrapolation.");

        SecondFamily? second = null;
        if (comb is not null && input.OrdersResolved)
            second = SecondFamilySearch.Find(pts, comb, options, assigned.Role, assigned.K, assigned.Residual, pMax);
        else if (comb is not null && assigned.Role.Count(r => r == LineRole.OffComb) >= 2)
            notes.Add("A second mode family is looked for only when the orders are resolved.");

        var (relDb, relSigma) = ModeLevels.Relative(lines, positive, main);
        var count = ModeLevels.Count(options.WithinDb, positive, relDb, assigned.Role);
        var smsr = ModeLevels.Smsr(lines, positive, main, assigned.Role, assigned.K, input.DetectionLimit);
        AddRoleNotes(notes, smsr, comb, state, second, assigned.Role);

        var result = new List<ModeLine>(lines.Count);
        for (var i = 0; i < lines.Count; i++)
        {
            var l = lines[i];
            result.Add(new ModeLine(i, l.FrequencyHz, l.FrequencySigmaHz, l.Intensity, l.IntensitySigma, l.Snr,
                relDb[i], relSigma[i], assigned.Role[i], assigned.K[i], assigned.Residual[i], assigned.ReadFrequency[i]));
        }

        // Report the comb's missing slots in the frame the lines use (k runs with frequency).
        if (comb is not null && state is { Sign: -1 })
            comb = comb with { MissingK = comb.MissingK.Select(k => -k).OrderBy(k => k).ToList(), FirstK = -comb.LastK, LastK = -comb.FirstK };

        return new ModeAnalysis(input.OrdersResolved, result, main, comb, spacing, second, count, smsr, envelope, folded,
            input.DetectionLimit, input.AbsoluteAnchorHz, notes);
    }

    /// <summary>
    /// The main comb: searched from the strongest line (<paramref name="seed"/>), fitted, and kept when at least
    /// <see cref="ModeAnalysisOptions.MinModesForComb"/> lines remain on it; its members are marked in
    /// <paramref name="assigned"/>. Nulls (with a note) when there is no comb.
    /// </summary>
    private static (CombFit? Comb, CombState? State) FitMainComb(List<CombPoint> pts, int positiveCount, int seed, double? fold,
        ModeAnalysisOptions options, LineAssignment assigned, List<string> notes)
    {
        var match = CombSearch.Find(pts, seed, fold, options);
        if (match is null || match.Members < options.MinModesForComb)
        {
            if (positiveCount >= 2)
            {
                notes.Add(match is null
                    ? "No comb: a spacing needs at least two lines."
                    : $"No comb: the best comb holds {match.Members} line(s), fewer than the {options.MinModesForComb} required.");
            }

            return (null, null);
        }

        var (comb, state) = CombFitter.Fit(match, pts, fold, options, notes);
        if (comb.MemberCount < options.MinModesForComb)
        {
            notes.Add($"No comb: after taking outliers off, {comb.MemberCount} line(s) remain, fewer than the {options.MinModesForComb} required.");
            return (null, null);
        }

        for (var p = 0; p < pts.Count; p++)
        {
            if (state.K[p] == CombSearch.NotMember) continue;
            var i = pts[p].Line;
            assigned.Role[i] = LineRole.MainComb;
            assigned.K[i] = state.K[p];
            assigned.Residual[i] = state.Residual[p];
        }

        if (comb.MemberCount == 2 && positiveCount >= 3)
            notes.Add("Only two lines lie on a common comb: the spacing is just their difference and cannot be checked against other modes.");
        return (comb, state);
    }

    /// <summary>
    /// Reads a folded comb (<see cref="FoldedSpacingReader"/>). When a spacing is chosen the modes are unfolded under it:
    /// k runs with frequency (sign −1 reverses the folded order) and every mode gets its read frequency.
    /// </summary>
    private static (FoldedReading Folded, ModeSpacing? Spacing, CombState State, EnvelopeFit Envelope) ReadFolded(CombFit comb, CombState state,
        double fsr, EnvelopeFit envelope, ModeInputLine mainLine, int main, LineAssignment assigned, ModeAnalysisOptions options, List<string> notes)
    {
        var folded = FoldedSpacingReader.Read(comb, fsr, envelope, options, notes);
        if (folded.Chosen is not { } chosen) return (folded, null, state, envelope);

        var sign = chosen.Sign;
        var onComb = assigned.MainComb();
        foreach (var i in onComb) assigned.K[i] = sign * assigned.K[i]!.Value;
        var originHz = mainLine.FrequencyHz - (assigned.Residual[main] ?? 0);
        foreach (var i in onComb)
            assigned.ReadFrequency[i] = originHz + assigned.K[i]!.Value * chosen.SpacingHz + (assigned.Residual[i] ?? 0);
        var spacing = Spacing(chosen.SpacingHz, chosen.SigmaHz, originHz, options.GroupIndex);
        if (envelope.Fitted)
            envelope = envelope with { CentreK = sign * envelope.CentreK };
        return (folded, spacing, state with { Sign = sign }, envelope);
    }

    /// <summary>Notes on the roles: an SMSR set by an off-comb line, lines off the comb(s), missing mode indices.</summary>
    private static void AddRoleNotes(List<string> notes, SideModeSuppression smsr, CombFit? comb, CombState? state, SecondFamily? second, LineRole[] role)
    {
        if (smsr.SideLineIndex is { } side && role[side] == LineRole.OffComb)
            notes.Add("The SMSR is set by a line off the comb; if that line is spurious, the laser's SMSR is higher.");

        var offComb = role.Count(r => r == LineRole.OffComb);
        if (offComb > 0 && comb is not null)
            notes.Add($"{offComb} line(s) lie off the {(second is null ? "comb" : "two combs")}: spurious lines, or modes of another family.");
        if (comb is { MissingK.Count: > 0 })
            notes.Add($"No line at mode index {string.Join(", ", comb.MissingK.Select(k => (state!.Sign * k).ToString("+0;-0;0")))}: " +
                      "these modes are below the detection limit (or folded onto another line).");
    }

    /// <summary>The spacing with the optical length c/(2Δ) and, given a group index, the physical length.</summary>
    private static ModeSpacing Spacing(double spacingHz, double? sigmaHz, double originHz, double? groupIndex)
    {
        var c = PhysicalConstants.SpeedOfLight;
        var optical = c / (2 * spacingHz);
        double? opticalSigma = sigmaHz is { } s ? optical * s / spacingHz : null;
        double? physical = groupIndex is { } n ? optical / n : null;
        double? physicalSigma = groupIndex is { } n2 && opticalSigma is { } os ? os / n2 : null;
        return new ModeSpacing(spacingHz, sigmaHz, originHz, optical, opticalSigma, groupIndex, physical, physicalSigma);
    }
}
