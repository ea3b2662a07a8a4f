namespace OrderUnfold.Analysis.Modes;

/// <summary>A line as the comb search sees it: position (folded into [0, FSR) when folded), sigma, intensity.</summary>
public sealed record CombPoint(int Line, double X, double? Sigma, double Intensity);

/// <summary>
/// Result of the comb search: slot k of point i (or <see cref="CombSearch.NotMember"/>) and its residual from
/// origin + k·step (wrapped into ±FSR/2 when folded).
/// </summary>
public sealed record CombMatch(double Origin, double Step, int[] K, double[] Residual, double Score, int Members, double[] Tolerance);

/// <summary>
/// Finds the comb ν = ν0 + k·Δ through the strongest line that explains most lines, robust to missing modes,
/// spurious lines and a second family.
/// <para>
/// Candidate steps come from the differences of pairs among the strongest lines divided by small integers
/// (with a fold F, the difference n·s ≡ d (mod F) gives s = (d + l·F)/n). Each candidate is refined: lines
/// within a tolerance of a slot are admitted, the contiguous run of slots through the strongest line that
/// maximises (Σ strength of the members − cost × empty slots) is kept, each slot takes at most one line (the strongest), and origin
/// and step are refitted by weighted least squares; this repeats until the membership settles (the first pass
/// with a wider tolerance, so that an imprecise candidate still collects its members). The candidate with
/// the best score wins (see <see cref="Better"/> for ties).
/// </para>
/// </summary>
public sealed class CombSearch
{
    /// <summary>The comb index of a line that belongs to no comb.</summary>
    public const int NotMember = int.MinValue;

    private const int StrongLines = 12;
    private const int MaxDivisorResolved = 12;
    private const int MaxDivisorFolded = 6;
    private const double ToleranceCap = 0.25;
    private const double FirstPassWidening = 2.5;
    private const int MaxIterations = 8;
    private const long ResolvedSlotLimit = 100_000;
    private const double SearchShare = 0.25;

    private readonly IReadOnlyList<CombPoint> _pts;
    private readonly int _seed;
    private readonly double? _fold;
    private readonly ModeAnalysisOptions _o;
    private readonly int _foldedKMax;
    private readonly double[] _weight;
    private readonly double[] _strength;

    private CombSearch(IReadOnlyList<CombPoint> pts, int seed, double? fold, ModeAnalysisOptions o)
    {
        _pts = pts;
        _seed = seed;
        _fold = fold;
        _o = o;
        _foldedKMax = Math.Max(2 * pts.Count, pts.Count + 8);
        var sigmas = PolynomialFit.Weights(pts.Select(p => p.Sigma).ToList(), out _);
        _weight = sigmas is null ? pts.Select(_ => 1.0).ToArray() : sigmas.Select(s => 1 / (s * s)).ToArray();
        var max = pts.Max(p => p.Intensity);
        _strength = pts.Select(p => Math.Pow(p.Intensity / max, StrengthExponent)).ToArray();
    }

    /// <summary>
    /// A line counts in the score with weight (P / P_max)^this: 1 for the strongest, 0.1 for a line 20 dB down.
    /// Weighting by strength is what tells a comb with a missing mode (leaving out strong lines would cost more
    /// than the empty slot) from a comb of half the spacing through a weak spurious line halfway between modes.
    /// </summary>
    public const double StrengthExponent = 0.5;

    /// <summary>After the search, lines exactly on the comb up to this many slots beyond its ends are added.</summary>
    private const int EdgeReach = 2;

    /// <summary>Best comb through point <paramref name="seed"/>; null when there is only one point.</summary>
    public static CombMatch? Find(IReadOnlyList<CombPoint> pts, int seed, double? fold, ModeAnalysisOptions o)
    {
        if (pts.Count < 2) return null;
        var search = new CombSearch(pts, seed, fold, o);
        CombMatch? best = null;
        foreach (var step in search.Candidates())
        {
            var m = search.Evaluate(step, pts[seed].X);
            if (m is null) continue;
            if (best is null || search.Better(m, best)) best = m;
        }

        return best is null ? null : search.ExtendEdges(search.Finish(best));
    }

    /// <summary>The winning comb with the final (wider) membership tolerance, refitted until the membership settles.</summary>
    private CombMatch Finish(CombMatch m)
    {
        var origin = m.Origin;
        var step = m.Step;
        int[]? previous = null;
        int[] k;
        double[] r;
        for (var iter = 0; ; iter++)
        {
            (k, r) = Members(origin, step, 1.0, search: false);
            if (iter >= 4 || (previous is not null && previous.SequenceEqual(k))) break;
            var refit = Refit(k, r, origin, step);
            if (refit is null) break;
            (origin, step) = refit.Value;
            previous = k;
        }

        var tol = Enumerable.Range(0, _pts.Count).Select(i => Tolerance(i, step, search: false)).ToArray();
        return new CombMatch(origin, step, k, r, Score(k), k.Count(x => x != NotMember), tol);
    }

    /// <summary>
    /// Adds lines that sit on a free slot (within the tolerance) up to <see cref="EdgeReach"/> slots beyond the
    /// comb's ends: a weak end mode beyond one missing mode is still a mode, though its weight alone did not pay
    /// for the empty slot in the search.
    /// </summary>
    private CombMatch ExtendEdges(CombMatch m)
    {
        var k = (int[])m.K.Clone();
        var r = (double[])m.Residual.Clone();
        var taken = k.Where(x => x != NotMember).ToHashSet();
        var lo = taken.Min() - EdgeReach;
        var hi = taken.Max() + EdgeReach;
        var added = false;
        foreach (var i in Enumerable.Range(0, _pts.Count).Where(i => k[i] == NotMember).OrderByDescending(i => _pts[i].Intensity))
        {
            var slot = Admissible(i, m.Origin, m.Step, 1.0, search: false)
                .Where(c => c.K >= lo && c.K <= hi && !taken.Contains(c.K))
                .OrderBy(c => Math.Abs(c.R))
                .FirstOrDefault((NotMember, 0.0));
            if (slot.Item1 == NotMember) continue;
            k[i] = slot.Item1;
            r[i] = slot.Item2;
            taken.Add(slot.Item1);
            added = true;
        }

        if (!added) return m;
        return m with { K = k, Residual = r, Members = taken.Count, Score = Score(k) };
    }

    private double Score(int[] k)
    {
        var members = Enumerable.Range(0, k.Length).Where(i => k[i] != NotMember).ToList();
        var len = members.Max(i => k[i]) - members.Min(i => k[i]) + 1;
        return members.Sum(i => _strength[i]) - _o.MissingSlotCost * (len - members.Count);
    }

    // ------------------------------------------------------------------ candidates

    private double MinStep()
    {
        var sig = _pts.Where(p => p.Sigma is > 0).Select(p => p.Sigma!.Value).ToArray();
        var fromSigma = sig.Length > 0 ? 6 * Medians.Upper(sig) : 0;
        double floor;
        if (_fold is { } f) floor = f * 1e-4;
        else
        {
            var span = _pts.Max(p => p.X) - _pts.Min(p => p.X);
            floor = Math.Max(span, 1) * 1e-5;
        }

        return Math.Max(fromSigma, floor);
    }

    private List<double> Candidates()
    {
        var strong = Enumerable.Range(0, _pts.Count).OrderByDescending(i => _pts[i].Intensity).Take(StrongLines).ToArray();
        var minStep = MinStep();
        var raw = new List<double>();
        for (var a = 0; a < strong.Length; a++)
        {
            for (var b = a + 1; b < strong.Length; b++)
            {
                var xa = _pts[strong[a]].X;
                var xb = _pts[strong[b]].X;
                if (_fold is { } f)
                {
                    var d = FoldArithmetic.Mod(xb - xa, f);
                    for (var n = 1; n <= MaxDivisorFolded; n++)
                    {
                        for (var l = 0; l < n; l++)
                        {
                            var s = FoldArithmetic.Mod((d + l * f) / n, f);
                            var c = Math.Min(s, f - s);
                            if (c >= minStep) raw.Add(c);
                        }
                    }
                }
                else
                {
                    var d = Math.Abs(xb - xa);
                    for (var n = 1; n <= MaxDivisorResolved; n++)
                    {
                        var s = d / n;
                        if (s < minStep) break;
                        raw.Add(s);
                    }
                }
            }
        }

        raw.Sort();
        var kept = new List<double>();
        foreach (var s in raw)
            if (kept.Count == 0 || s - kept[^1] > 1e-4 * _o.CombToleranceFraction * s) kept.Add(s);
        return kept;
    }

    // ------------------------------------------------------------------ evaluation

    private double Scale(double step)
    {
        if (_fold is not { } f) return Math.Abs(step);
        var s = FoldArithmetic.Mod(step, f);
        return Math.Min(s, f - s);
    }

    private double Wrap(double d) => FoldArithmetic.WrapTo(d, _fold);

    /// <summary>
    /// Membership tolerance of point i: max(SigmaTolerance·σ, fraction·step), at most a quarter of the step. While
    /// searching, a line with a sigma gets a quarter of the fraction (so a wrong comb whose residuals are many
    /// sigmas cannot collect members); the final membership uses the full fraction, which leaves room for a
    /// smoothly irregular comb (dispersion).
    /// </summary>
    public double Tolerance(int i, double step, double widen = 1, bool search = true)
    {
        var scale = Scale(step);
        var hasSigma = _pts[i].Sigma is > 0;
        var t = (search && hasSigma ? SearchShare : 1.0) * _o.CombToleranceFraction * scale;
        if (_pts[i].Sigma is double sg && sg > 0) t = Math.Max(t, _o.SigmaTolerance * sg);
        return Math.Min(t * widen, ToleranceCap * widen * scale);
    }

    /// <summary>
    /// Slots within tolerance of point i: (k, residual). When folded, several slots can be within tolerance (the
    /// step is then nearly commensurate with the FSR); only the one nearest to slot 0 is kept (on a tie, the
    /// smaller residual), since a mode closer in index to the strongest is the likelier reading.
    /// </summary>
    private List<(int K, double R)> Admissible(int i, double origin, double step, double widen, bool search = true)
    {
        var all = AllAdmissible(i, origin, step, widen, search);
        if (all.Count <= 1) return all;
        var best = all.OrderBy(c => Math.Abs(c.K)).ThenBy(c => Math.Abs(c.R)).First();
        return [best];
    }

    private List<(int K, double R)> AllAdmissible(int i, double origin, double step, double widen, bool search)
    {
        var list = new List<(int, double)>(2);
        var tol = Tolerance(i, step, widen, search);
        var d = _pts[i].X - origin;
        if (_fold is null)
        {
            var q = Math.Round(d / step);
            if (Math.Abs(q) > ResolvedSlotLimit) return list;
            var r = d - q * step;
            if (Math.Abs(r) <= tol) list.Add(((int)q, r));
        }
        else
        {
            for (var k = -_foldedKMax; k <= _foldedKMax; k++)
            {
                var r = Wrap(d - k * step);
                if (Math.Abs(r) <= tol) list.Add((k, r));
            }
        }

        return list;
    }

    /// <summary>
    /// The run of slots [a, b] through slot 0 with the best (Σ strength of occupied slots − cost·empty slots).
    /// The score splits into a part left of slot 0 and a part right of it, so each side is extended on its own
    /// to its best end (on a tie, the longer run).
    /// </summary>
    private (int A, int B) BestWindow(List<(int K, double R)>[] adm)
    {
        var slotWeight = new Dictionary<int, double>();
        for (var i = 0; i < adm.Length; i++)
            foreach (var (k, _) in adm[i])
                if (k != 0) slotWeight[k] = Math.Max(slotWeight.GetValueOrDefault(k), _strength[i]);
        var right = slotWeight.Keys.Where(k => k > 0).OrderBy(k => k).ToArray();
        var left = slotWeight.Keys.Where(k => k < 0).OrderByDescending(k => k).ToArray();
        return (-BestReach(left.Select(k => (-k, slotWeight[k])).ToArray()), BestReach(right.Select(k => (k, slotWeight[k])).ToArray()));
    }

    /// <summary>Best distance from slot 0 along one side, given the occupied distances (ascending) and their weights.</summary>
    private int BestReach((int Distance, double Weight)[] side)
    {
        var best = 0;
        var bestScore = 0.0;
        var sum = 0.0;
        for (var j = 0; j < side.Length; j++)
        {
            sum += side[j].Weight;
            var empty = side[j].Distance - (j + 1);
            var score = sum - _o.MissingSlotCost * empty;
            if (score >= bestScore - 1e-12)
            {
                bestScore = Math.Max(score, bestScore);
                best = side[j].Distance;
            }
        }

        return best;
    }

    /// <summary>One line per slot inside [a, b], strongest lines first; the seed is always at slot 0.</summary>
    private (int[] K, double[] R) Assign(List<(int K, double R)>[] adm, int a, int b, double origin, double step)
    {
        var n = _pts.Count;
        var k = Enumerable.Repeat(NotMember, n).ToArray();
        var r = new double[n];
        var taken = new HashSet<int> { 0 };
        k[_seed] = 0;
        r[_seed] = Wrap(_pts[_seed].X - origin);
        foreach (var i in Enumerable.Range(0, n).Where(i => i != _seed).OrderByDescending(i => _pts[i].Intensity))
        {
            var best = adm[i].Where(c => c.K >= a && c.K <= b && !taken.Contains(c.K)).OrderBy(c => Math.Abs(c.R)).FirstOrDefault((NotMember, 0.0));
            if (best.Item1 == NotMember) continue;
            k[i] = best.Item1;
            r[i] = best.Item2;
            taken.Add(best.Item1);
        }

        return (k, r);
    }

    private CombMatch? Evaluate(double step0, double origin0)
    {
        var origin = origin0;
        var step = step0;
        int[]? previous = null;
        var minStep = MinStep();
        for (var iter = 0; iter < MaxIterations; iter++)
        {
            var widen = iter == 0 ? FirstPassWidening : 1.0;
            var (k, r) = Members(origin, step, widen);
            var refit = Refit(k, r, origin, step);
            if (refit is null) break;
            var same = previous is not null && previous.SequenceEqual(k);
            (origin, step) = refit.Value;
            if (Scale(step) < minStep / 2) return null;
            if (same) break;
            previous = k;
        }

        var (kf, rf) = Members(origin, step, 1.0);
        var members = kf.Count(x => x != NotMember);
        var score = Score(kf);
        var tol = Enumerable.Range(0, _pts.Count).Select(i => Tolerance(i, step)).ToArray();
        return new CombMatch(origin, step, kf, rf, score, members, tol);
    }

    private (int[] K, double[] R) Members(double origin, double step, double widen, bool search = true)
    {
        var adm = new List<(int K, double R)>[_pts.Count];
        for (var i = 0; i < _pts.Count; i++) adm[i] = Admissible(i, origin, step, widen, search);
        var (a, b) = BestWindow(adm);
        return Assign(adm, a, b, origin, step);
    }

    /// <summary>Weighted straight line through the lifted member positions (origin + k·step + residual) against k.</summary>
    private (double Origin, double Step)? Refit(int[] k, double[] r, double origin, double step)
    {
        double s = 0, sx = 0, sy = 0, sxx = 0, sxy = 0;
        var distinct = new HashSet<int>();
        for (var i = 0; i < k.Length; i++)
        {
            if (k[i] == NotMember) continue;
            distinct.Add(k[i]);
            var w = _weight[i];
            var y = origin + k[i] * step + r[i];
            s += w;
            sx += w * k[i];
            sy += w * y;
            sxx += w * k[i] * (double)k[i];
            sxy += w * k[i] * y;
        }

        if (distinct.Count < 2) return null;
        var den = s * sxx - sx * sx;
        if (!(den > 0)) return null;
        var newStep = (s * sxy - sx * sy) / den;
        var newOrigin = (sy - newStep * sx) / s;
        return (newOrigin, newStep);
    }

    /// <summary>Weighted mean square residual of a match over its members (χ²/n with sigmas, Hz² without).</summary>
    private double Spread(CombMatch m)
    {
        double sum = 0;
        for (var i = 0; i < m.K.Length; i++)
            if (m.K[i] != NotMember) sum += _weight[i] * m.Residual[i] * m.Residual[i];
        return sum / Math.Max(1, m.Members);
    }

    /// <summary>
    /// Ranking of two candidates: the higher score; on a tie, the clearly tighter fit (spread smaller by more than
    /// a factor 2: with folded positions, a step that makes the modes look evenly spread round the FSR fits only
    /// roughly), then the larger step (a finer comb that leaves slots empty is not preferred), then the tighter fit.
    /// </summary>
    private bool Better(CombMatch a, CombMatch b)
    {
        if (Math.Abs(a.Score - b.Score) > 1e-9) return a.Score > b.Score;
        var pa = Spread(a);
        var pb = Spread(b);
        if (pa < pb / 2 || pb < pa / 2) return pa < pb;
        var sa = Scale(a.Step);
        var sb = Scale(b.Step);
        if (Math.Abs(sa - sb) > 0.05 * Math.Max(sa, sb)) return sa > sb;
        return pa < pb;
    }
}
