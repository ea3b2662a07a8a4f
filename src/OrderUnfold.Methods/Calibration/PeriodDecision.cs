using OrderUnfold.Instruments;
using OrderUnfold.Units;

namespace OrderUnfold.Calibration;

/// <summary>How one candidate period explains the peak pattern of a sweep.</summary>
/// <param name="Label">"half", "chosen", "double" or "start ×k" (a start the self-calibration tried).</param>
/// <param name="PeriodScan">Scan units per period at the middle of the calibrated range.</param>
/// <param name="Explained">Height-weighted share of the predicted repeats (every peak group predicts a peak one period
/// later and earlier inside the sweep) that are found; 1 when every repeat is there.</param>
/// <param name="Predictions">Repeats predicted inside the sweep.</param>
/// <param name="HeightAgreement">Smallest ratio weaker/stronger of the mean heights of alternate repeats within a group (1: equal).</param>
/// <param name="Groups">Peak groups (distinct positions within one period).</param>
/// <param name="Consistent">Explained ≥ <see cref="PeriodDecider.MinExplained"/> and heights agree ≥ <see cref="PeriodDecider.MinHeightAgreement"/>.</param>
/// <param name="Chosen">Whether this is the period used.</param>
public sealed record PeriodCandidateScore(string Label, double PeriodScan, double Explained, int Predictions, double HeightAgreement, int Groups,
    bool Consistent, bool Chosen);

/// <summary>
/// The decision on a sweep's period (the FSR in scan units) from its whole peak pattern, with the evidence:
/// the candidates tried (always the half and the double of the chosen period) and how each explained the peaks.
/// </summary>
/// <param name="PeriodScan">Scan units per period at the middle of the calibrated range.</param>
/// <param name="PeriodHz">The period in Hz the axis was scaled to.</param>
/// <param name="StatedFsrHz">The FSR stated in the setup.</param>
/// <param name="Candidates">Candidates and their scores.</param>
/// <param name="Basis">Why this period: plain words for the report.</param>
/// <param name="Families">Transverse families found beside TEM00 (offsets measured).</param>
/// <param name="Fundamental">How the TEM00 group was identified.</param>
public sealed record PeriodDecision(double PeriodScan, double PeriodHz, double StatedFsrHz, IReadOnlyList<PeriodCandidateScore> Candidates, string Basis,
    IReadOnlyList<CavityModeFamily> Families, string Fundamental)
{
    /// <summary>Phase (in periods, on the axis the decision was made with, from the low end of the sweep) of the TEM00 group
    /// whose families were found; null without families.</summary>
    public double? FundamentalPhase { get; init; }

    /// <summary>Phase tolerance (periods) within which peaks were grouped.</summary>
    public double Tolerance { get; init; }

    /// <summary>One line for the console.</summary>
    public string Summary =>
        $"period {PeriodScan:G5} scan units = {Quantity.FormatFrequency(PeriodHz)} ({Basis}); candidates " +
        string.Join(", ", Candidates.Select(c => $"{c.Label} {c.PeriodScan:G4}: explained {c.Explained:P0} of {c.Predictions}, heights {c.HeightAgreement:F2}{(c.Chosen ? " [chosen]" : "")}"));
}

/// <summary>
/// Decides the period of a sweep from its peak pattern. A period P is consistent with the peaks when every group of
/// peaks (peaks at one position modulo P) recurs at every period inside the sweep with about the same height; every
/// multiple of a consistent period is consistent too, so the shortest consistent period is the period. The half and
/// the double of the self-calibration's period are always tested. The groups at the decided period are then split
/// into source lines and transverse families of the cavity: a family is a group at a fixed offset from a parent group,
/// recognised by the Gouy ladder (families N = 1, 2, … at N·a modulo 1 of the FSR), by the mirror radii when stated,
/// or, near half the FSR, as the odd family of a near-confocal cavity.
/// </summary>
public static class PeriodDecider
{
    /// <summary>Share of predicted repeats that must be found for a period to be consistent.</summary>
    public const double MinExplained = 0.85;

    /// <summary>Alternate repeats within a group must agree in height at least this well (weaker/stronger) for the
    /// group to be one feature (common practice: a confocal cavity that is partly mode-matched alternates by 5–15 %).</summary>
    public const double MinHeightAgreement = 0.7;

    /// <summary>A peak used in the decision: scan coordinate, height, FWHM in scan units.</summary>
    public readonly record struct PatternPeak(double X, double Height, double WidthX);

    /// <summary>Scores one candidate period. <paramref name="phaseOf"/> maps x to the number of candidate periods from the sweep start (monotone).</summary>
    public static PeriodCandidateScore Score(string label, double periodScan, IReadOnlyList<PatternPeak> peaks, Func<double, double> phaseOf,
        double phaseLo, double phaseHi, double tolerance)
    {
        var groups = Group(peaks, phaseOf, tolerance);
        double predicted = 0, hit = 0;
        var count = 0;
        var agreement = 1.0;
        foreach (var g in groups)
        {
            var h = g.Members.Average(m => m.Height);
            var orders = g.Members.Select(m => (int)Math.Round(phaseOf(m.X) - g.Phase)).ToHashSet();
            var first = (int)Math.Ceiling(phaseLo - g.Phase + tolerance);
            var last = (int)Math.Floor(phaseHi - g.Phase - tolerance);
            // every order inside the sweep next to a found member is a prediction; it is explained when a member is there
            for (var k = first; k <= last; k++)
            {
                if (!orders.Contains(k - 1) && !orders.Contains(k + 1)) continue;
                predicted += h;
                count++;
                if (orders.Contains(k)) hit += h;
            }

            var even = g.Members.Where(m => ((int)Math.Round(phaseOf(m.X) - g.Phase) & 1) == 0).Select(m => m.Height).ToList();
            var odd = g.Members.Where(m => ((int)Math.Round(phaseOf(m.X) - g.Phase) & 1) != 0).Select(m => m.Height).ToList();
            if (even.Count > 0 && odd.Count > 0)
            {
                var a = even.Average();
                var b = odd.Average();
                agreement = Math.Min(agreement, Math.Min(a, b) / Math.Max(a, b));
            }
        }

        var explained = predicted > 0 ? hit / predicted : 0;
        var consistent = explained >= MinExplained && agreement >= MinHeightAgreement;
        return new PeriodCandidateScore(label, periodScan, explained, count, agreement, groups.Count, consistent, false);
    }

    /// <summary>A group of peaks at one position modulo the period.</summary>
    public sealed record PeakGroup(double Phase, IReadOnlyList<PatternPeak> Members)
    {
        /// <summary>Mean height of the group's peaks.</summary>
        public double Height => Members.Average(m => m.Height);
    }

    /// <summary>Groups peaks by their position modulo one period (phase in [0, 1)), tallest first.</summary>
    public static List<PeakGroup> Group(IReadOnlyList<PatternPeak> peaks, Func<double, double> phaseOf, double tolerance)
    {
        var items = peaks.Select(p => (Peak: p, Q: Frac(phaseOf(p.X)))).OrderBy(t => t.Q).ToList();
        var groups = new List<List<(PatternPeak Peak, double Q)>>();
        foreach (var it in items)
        {
            var g = groups.FirstOrDefault(g => CircularDistance(MeanPhase(g.Select(v => v.Q)), it.Q) <= tolerance);
            if (g is null) groups.Add([it]);
            else g.Add(it);
        }

        return groups.Select(g => new PeakGroup(MeanPhase(g.Select(v => v.Q)), g.Select(v => v.Peak).ToList()))
            .OrderByDescending(g => g.Height).ToList();
    }

    /// <summary>
    /// Splits the groups at the decided period into source lines and transverse families of the cavity. Returns the
    /// families (offset measured from the fundamental group) and a sentence on how the fundamental was identified.
    /// </summary>
    /// <param name="groups">Peak groups at the decided period (phase in periods).</param>
    /// <param name="instrument">The cavity (mirror radii and length, when stated, predict the offsets).</param>
    /// <param name="tolerance">Phase tolerance (periods) within which two groups are at the same position.</param>
    /// <param name="minMembers">Groups with fewer members are not used (a stray peak is not a family).</param>
    public static (List<CavityModeFamily> Families, string Fundamental) Families(List<PeakGroup> groups, Instrument instrument, double tolerance, int minMembers)
    {
        var split = Split(groups, instrument, tolerance, minMembers);
        return (split.Families, split.Fundamental);
    }

    /// <summary>How <see cref="Split"/> divided the peak groups: the families, how TEM00 was identified, and its phase.</summary>
    public sealed record FamilySplit(List<CavityModeFamily> Families, string Fundamental, double? FundamentalPhase);

    /// <summary>
    /// <see cref="Families"/> with the phase of the TEM00 group, and weaker families: once a ladder is found among the clear
    /// groups, a weaker group (from <paramref name="weakGroups"/>: every peak the self-calibration uses, down to a few % of
    /// the tallest) that sits at a free rung N·a (N ≤ 3) of that ladder and accompanies every TEM00 member but at most one
    /// (the sweep's edges) is the family N too: a family that follows the fundamental at its Gouy offset, order after order,
    /// belongs to the cavity whatever its height.
    /// </summary>
    public static FamilySplit Split(List<PeakGroup> groups, Instrument instrument, double tolerance, int minMembers, List<PeakGroup>? weakGroups = null)
    {
        var usable = groups.Where(g => g.Members.Count >= minMembers).ToList();
        if (usable.Count < 2) return new([], "one peak group: no transverse family", null);

        // offsets the mirror radii predict (apparent offsets after TEM00), with a margin for nominal radii
        double[]? predicted = null;
        if (instrument.MirrorRadiiM is { } radii && instrument.LengthM is double len)
        {
            predicted = Enumerable.Range(1, 3).Select(n => CavityModeFamily.Frac(-GouyPhase.OffsetFsr(n, len, radii.R1, radii.R2))).ToArray();
            if (predicted.Any(double.IsNaN)) predicted = null;
        }

        (List<(PeakGroup G, int N, double A)> Members, double Score, double A, PeakGroup Base) best = ([], 0, 0, usable[0]);
        foreach (var baseGroup in usable)
        {
            foreach (var first in usable)
            {
                if (ReferenceEquals(first, baseGroup)) continue;
                var a = Frac(first.Phase - baseGroup.Phase);
                var ladder = new List<(PeakGroup G, int N, double A)> { (first, 1, a) };
                for (var n = 2; n <= 3; n++)
                {
                    var target = Frac(baseGroup.Phase + n * a);
                    var match = usable.FirstOrDefault(g => !ReferenceEquals(g, baseGroup) && !ladder.Any(l => ReferenceEquals(l.G, g)) &&
                                                           CircularDistance(g.Phase, target) <= 1.5 * tolerance);
                    if (match is not null) ladder.Add((match, n, Frac(match.Phase - baseGroup.Phase)));
                }

                var nearHalf = Math.Abs(a - 0.5) < 0.06;
                var radiiMatch = predicted is not null && CircularDistance(predicted[0], a) < 0.04;
                // a family accompanies every clear source line at the same offset with the same height ratio; groups the
                // ladder does not account for are other source lines, and each must show the family too
                var ratio = first.Height / baseGroup.Height;
                var tallest = usable.Max(g => g.Height);
                var others = usable.Where(g => !ReferenceEquals(g, baseGroup) && !ladder.Any(l => ReferenceEquals(l.G, g))).ToList();
                var parents = 0;
                var everyParent = true;
                foreach (var g in others.Where(g => g.Height * ratio >= 0.1 * tallest))
                {
                    var partner = usable.Any(c => !ReferenceEquals(c, g) && CircularDistance(c.Phase, g.Phase + a) <= 1.5 * tolerance &&
                                                  Math.Abs(Math.Log(c.Height / g.Height / ratio)) < 0.25);
                    if (partner) parents++;
                    else everyParent = false;
                }

                var accounted = others.Count == 0; // one source line: every group is TEM00 or a family
                // equally spaced groups alone are no evidence: a laser's longitudinal modes are equally spaced too
                var evidence = accounted ? radiiMatch || nearHalf : everyParent && parents >= 1 && (radiiMatch || nearHalf || parents >= 2);
                if (!evidence) continue;
                var score = ladder.Count - 1 + (radiiMatch ? 1.5 : 0) + (nearHalf ? 0.5 : 0) + parents;
                // prefer the ladder that accounts for the most groups, then the taller base
                score += 0.01 * baseGroup.Height / usable[0].Height;
                if (score > best.Score) best = (ladder, score, a, baseGroup);
            }
        }

        if (best.Members.Count == 0) return new([], "the peak groups do not form a transverse-family ladder: they are taken as source lines", null);
        var b = best.Base;
        if (weakGroups is not null) AddWeakFamilies(best.Members, b, best.A, weakGroups, usable, tolerance, minMembers);

        var families = best.Members.Select(m => new CavityModeFamily(m.N, Frac(-m.A), m.G.Height / b.Height,
            predicted is not null ? "measured (mirror radii predicted " + predicted[m.N - 1].ToString("F4") + " FSR after TEM00)" : "measured")).ToList();
        var why = best.Members.Count >= 2
            ? $"TEM00 is the group whose families N = 1..{best.Members.Max(m => m.N)} lie at N·{best.A:F4} FSR after it (a Gouy ladder)"
            : predicted is not null && CircularDistance(predicted[0], best.A) < 0.04
                ? $"TEM00 is the group with a family {best.A:F4} FSR after it, as the mirror radii predict ({predicted[0]:F4})"
                : $"a family {best.A:F4} FSR after the taller group (near half the FSR: the odd family of a near-confocal cavity); which group is TEM00 is not decided by the data: state mirror_radius to settle it";
        return new(families, why, b.Phase);
    }

    /// <summary>Adds, at each free rung N·a (N ≤ 3) of the ladder on <paramref name="baseGroup"/>, the weak group that sits
    /// there and accompanies every TEM00 member but at most one; then sorts the members by N.</summary>
    private static void AddWeakFamilies(List<(PeakGroup G, int N, double A)> members, PeakGroup baseGroup, double a, List<PeakGroup> weakGroups,
        List<PeakGroup> usable, double tolerance, int minMembers)
    {
        for (var n = 2; n <= 3; n++)
        {
            if (members.Any(m => m.N == n)) continue;
            var target = Frac(baseGroup.Phase + n * a);
            var weak = weakGroups.Where(g => CircularDistance(g.Phase, target) <= 1.5 * tolerance &&
                                             g.Members.Count >= Math.Max(minMembers, baseGroup.Members.Count - 1) &&
                                             !usable.Any(u => CircularDistance(u.Phase, g.Phase) <= tolerance) &&
                                             !members.Any(m => CircularDistance(m.G.Phase, g.Phase) <= tolerance))
                .MaxBy(g => g.Members.Count + g.Height / baseGroup.Height);
            if (weak is not null) members.Add((weak, n, Frac(weak.Phase - baseGroup.Phase)));
        }

        members.Sort((p, q) => p.N.CompareTo(q.N));
    }

    /// <summary>The fractional part of <paramref name="v"/>, in [0, 1).</summary>
    public static double Frac(double v) => v - Math.Floor(v);

    /// <summary>Distance between two fractions of a period on the circle, in [0, 0.5].</summary>
    public static double CircularDistance(double a, double b)
    {
        var d = Math.Abs(Frac(a) - Frac(b));
        return Math.Min(d, 1 - d);
    }

    private static double MeanPhase(IEnumerable<double> q)
    {
        double s = 0, c = 0;
        foreach (var v in q)
        {
            s += Math.Sin(2 * Math.PI * v);
            c += Math.Cos(2 * Math.PI * v);
        }

        return Frac(Math.Atan2(s, c) / (2 * Math.PI));
    }
}
