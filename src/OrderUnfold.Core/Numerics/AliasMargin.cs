using OrderUnfold.Instruments;

namespace OrderUnfold.Numerics;

/// <summary>A point of the alias-margin curve: a shift Δ and the margin there.</summary>
/// <param name="DeltaHz">Frequency shift Δ, Hz.</param>
/// <param name="MarginLinewidths">Alias margin at Δ, in linewidths.</param>
public readonly record struct MarginPoint(double DeltaHz, double MarginLinewidths);

/// <summary>
/// A common period of a set of instruments: <see cref="Multiple"/>·FSR₁ is (within the stated relative
/// tolerance of each FSR ratio) a whole multiple of every FSR, so the margin curve returns to zero there and
/// the pattern of coincidences repeats.
/// </summary>
/// <param name="Multiple">n: the repeat is n·FSR of the first instrument. For two instruments with
/// FSR₁/FSR₂ = p/q in lowest terms, n = q.</param>
/// <param name="OtherMultiples">For each further instrument k, the integer m_k with n·FSR₁ ≈ m_k·FSR_k
/// (for two instruments this is p).</param>
/// <param name="RepeatHz">n·FSR₁ in Hz.</param>
public sealed record ExactRepeat(long Multiple, IReadOnlyList<long> OtherMultiples, double RepeatHz);

/// <summary>
/// How well a set of instruments tells a frequency shift Δ apart from zero. In instrument k the misfit of Δ
/// is the distance from Δ to the nearest multiple of FSR_k, in units of that instrument's linewidth; the
/// alias margin is the largest misfit over the instruments (a line moved by Δ looks the same in every
/// instrument only when all misfits are small).
/// </summary>
/// <remarks>
/// Each misfit is piecewise linear in Δ, with kinks at the multiples of FSR_k/2 (zeros at whole multiples,
/// peaks of FSR_k/(2·linewidth_k) = 𝓕_k/2 halfway between). Between two neighbouring kinks of all instruments
/// every misfit is a straight line, so the margin (their maximum) is convex there and its corners are
/// the kinks and the crossings of two of the lines. <see cref="Vertices"/> lists all of them; the margin is
/// exactly linear between consecutive vertices. Minima, first crossings of a threshold and the drawn curve
/// all come from that list, so they are exact (no sampling step), and the work grows with the number of
/// FSRs in the range, not with range/linewidth. A local minimum is either a multiple of some FSR_k or the
/// crossing of a rising and a falling misfit between two nearly coincident multiples; at such a crossing the
/// margin is gap/(linewidth_i + linewidth_j), about half of its value at either multiple.
/// </remarks>
public static class AliasMargin
{
    /// <summary>Misfit of Δ in one instrument, in linewidths.</summary>
    public static double Misfit(Instrument instrument, double deltaHz)
    {
        var r = Math.Abs(deltaHz) % instrument.FsrHz;
        var d = Math.Min(r, instrument.FsrHz - r);
        return d / instrument.LinewidthHz;
    }

    /// <summary>Alias margin of Δ: max over instruments of the misfit, in linewidths.</summary>
    public static double Margin(IReadOnlyList<Instrument> instruments, double deltaHz)
    {
        var m = 0.0;
        foreach (var i in instruments) m = Math.Max(m, Misfit(i, deltaHz));
        return m;
    }

    /// <summary>
    /// Smallest Δ &gt; <paramref name="minimumHz"/> at which the margin falls below <paramref name="thresholdLinewidths"/>:
    /// two lines this far apart can be confused. Searched up to <paramref name="limitHz"/>; returns the limit when
    /// no alias is found before it. The search steps by a tenth of the narrowest linewidth.
    /// </summary>
    /// <remarks>Kept for the unfold's default window; <see cref="FirstBelow"/> gives the same point exactly.</remarks>
    public static double FirstAlias(IReadOnlyList<Instrument> instruments, double thresholdLinewidths, double limitHz, double? minimumHz = null)
    {
        if (instruments.Count == 0) throw new ArgumentException("no instruments");
        var narrow = instruments.Min(i => i.LinewidthHz);
        var step = narrow / 10;
        var start = minimumHz ?? thresholdLinewidths * narrow * 2;
        for (var d = start; d <= limitHz; d += step)
            if (Margin(instruments, d) < thresholdLinewidths) return d;
        return limitHz;
    }

    /// <summary>
    /// The smallest shift that counts as a possible alias rather than the line itself:
    /// 2 × <paramref name="thresholdLinewidths"/> × the narrowest linewidth. Near Δ = 0 the margin is
    /// Δ / (narrowest linewidth), so it is twice the threshold there and can only fall below the threshold again
    /// at a real near-coincidence.
    /// </summary>
    public static double DefaultMinimumShiftHz(IReadOnlyList<Instrument> instruments, double thresholdLinewidths)
    {
        RequireInstruments(instruments);
        return 2 * thresholdLinewidths * instruments.Min(i => i.LinewidthHz);
    }

    /// <summary>
    /// The corners of the margin curve over [<paramref name="fromHz"/>, <paramref name="toHz"/>], sorted by Δ,
    /// both ends included. The margin is exactly linear between consecutive points, so drawing them joined by
    /// straight lines draws the margin without sampling error.
    /// </summary>
    public static IReadOnlyList<MarginPoint> Vertices(IReadOnlyList<Instrument> instruments, double fromHz, double toHz)
    {
        var list = new List<double>();
        CollectVertices(instruments, fromHz, toHz, list);
        return list.Select(d => new MarginPoint(d, Margin(instruments, d))).ToList();
    }

    /// <summary>
    /// The smallest margin over [<paramref name="fromHz"/>, <paramref name="toHz"/>] and the Δ where it occurs
    /// (the smallest such Δ when several tie). Exact: evaluated at every corner of the piecewise linear curve.
    /// </summary>
    public static MarginPoint Minimum(IReadOnlyList<Instrument> instruments, double fromHz, double toHz)
    {
        var list = new List<double>();
        return Minimum(instruments, fromHz, toHz, list);
    }

    /// <summary>
    /// The worst alias over [<paramref name="fromHz"/>, <paramref name="toHz"/>]: the smallest margin after leaving
    /// out the stretch at the start of the range where the margin only rises (the flank of the central peak at
    /// Δ = 0, i.e. the line itself). It is the lowest local minimum in the range, or the value at
    /// <paramref name="toHz"/> when the margin is falling there (a near-coincidence just beyond the range);
    /// when the margin rises over the whole range there is no alias in it and the value at
    /// <paramref name="toHz"/> is returned. Exact, like <see cref="Minimum(IReadOnlyList{Instrument}, double, double)"/>.
    /// </summary>
    public static MarginPoint LowestAlias(IReadOnlyList<Instrument> instruments, double fromHz, double toHz) =>
        LowestAlias(instruments, fromHz, toHz, new List<double>());

    /// <summary>
    /// The first Δ ≥ <paramref name="fromHz"/> at which the margin is below <paramref name="thresholdLinewidths"/>
    /// (where the straight piece through the threshold crosses it), or null when it stays at or above the
    /// threshold up to <paramref name="toHz"/>. With <paramref name="fromHz"/> = <see cref="DefaultMinimumShiftHz"/>
    /// this is the unambiguous range of the set.
    /// </summary>
    public static double? FirstBelow(IReadOnlyList<Instrument> instruments, double thresholdLinewidths, double fromHz, double toHz)
    {
        var list = new List<double>();
        CollectVertices(instruments, fromHz, toHz, list);
        var prevD = list[0];
        var prevM = Margin(instruments, prevD);
        if (prevM < thresholdLinewidths) return prevD;
        for (var i = 1; i < list.Count; i++)
        {
            var d = list[i];
            var m = Margin(instruments, d);
            if (m < thresholdLinewidths)
            {
                // linear between vertices: solve prevM + (m − prevM)·t = threshold
                var t = (prevM - thresholdLinewidths) / (prevM - m);
                return prevD + Math.Clamp(t, 0, 1) * (d - prevD);
            }

            prevD = d;
            prevM = m;
        }

        return null;
    }

    /// <summary>
    /// The local minima of the margin over [<paramref name="fromHz"/>, <paramref name="toHz"/>] that lie below
    /// <paramref name="thresholdLinewidths"/>: the shifts at which a line can be taken for another one. Sorted by Δ.
    /// </summary>
    public static IReadOnlyList<MarginPoint> Aliases(IReadOnlyList<Instrument> instruments, double thresholdLinewidths, double fromHz, double toHz)
    {
        var v = Vertices(instruments, fromHz, toHz);
        var result = new List<MarginPoint>();
        for (var i = 0; i < v.Count; i++)
        {
            var m = v[i].MarginLinewidths;
            if (!(m < thresholdLinewidths)) continue;
            var left = i == 0 ? double.PositiveInfinity : v[i - 1].MarginLinewidths;
            var right = i == v.Count - 1 ? double.PositiveInfinity : v[i + 1].MarginLinewidths;
            // a flat bottom (equal neighbours) is reported once, at its left end
            if (m < left && m <= right) result.Add(v[i]);
        }

        return result;
    }

    /// <summary>
    /// The first common period of the instruments within <paramref name="limitMultiple"/>·FSR₁: the smallest
    /// n ≥ 1 such that for every other instrument k some integer m_k satisfies
    /// |n·FSR₁/FSR_k − m_k| ≤ n·(FSR₁/FSR_k)·<paramref name="relativeTolerances"/>[k], i.e. a fraction m_k/n lies
    /// within the relative tolerance of the ratio FSR₁/FSR_k. For two instruments with FSR₁/FSR₂ = p/q in lowest
    /// terms this is n = q, m = p (q·FSR₁ = p·FSR₂), the smallest denominator of any fraction within tolerance.
    /// Null when there is none up to the limit.
    /// </summary>
    /// <param name="instruments">At least two; the first is the reference.</param>
    /// <param name="relativeTolerances">Per instrument (the first entry is ignored): how far, relatively, the ratio
    /// FSR₁/FSR_k may be from the fraction. Use about 1e-9 for values known exactly; for a part made to a length
    /// tolerance, tolerance/length.</param>
    /// <param name="limitMultiple">Largest n tried.</param>
    public static ExactRepeat? FindRepeat(IReadOnlyList<Instrument> instruments, IReadOnlyList<double> relativeTolerances, long limitMultiple)
    {
        if (instruments.Count < 2) throw new ArgumentException("a repeat needs at least two instruments", nameof(instruments));
        if (relativeTolerances.Count != instruments.Count) throw new ArgumentException("one tolerance per instrument", nameof(relativeTolerances));
        var f1 = instruments[0].FsrHz;
        var k = instruments.Count - 1;
        var lo = new double[k];
        var hi = new double[k];
        for (var i = 0; i < k; i++)
        {
            var r = f1 / instruments[i + 1].FsrHz;
            var e = Math.Max(relativeTolerances[i + 1], 1e-12);
            lo[i] = r * (1 - e);
            hi[i] = r * (1 + e);
        }

        var m = new long[k];
        for (long n = 1; n <= limitMultiple; n++)
        {
            var all = true;
            for (var i = 0; i < k && all; i++)
            {
                var a = Math.Ceiling(n * lo[i]);
                var b = Math.Floor(n * hi[i]);
                if (a > b) all = false;
                else m[i] = (long)Math.Clamp(Math.Round(n * (f1 / instruments[i + 1].FsrHz)), a, b);
            }

            if (all) return new ExactRepeat(n, m.ToArray(), n * f1);
        }

        return null;
    }

    /// <summary>The smallest alias margin over shifts in [<paramref name="fromHz"/>, <paramref name="toHz"/>] and the shift where it occurs; <paramref name="buffer"/> is reused for the candidate shifts (no allocation per call).</summary>
    public static MarginPoint Minimum(IReadOnlyList<Instrument> instruments, double fromHz, double toHz, List<double> buffer)
    {
        CollectVertices(instruments, fromHz, toHz, buffer);
        var best = new MarginPoint(double.NaN, double.PositiveInfinity);
        foreach (var d in buffer)
        {
            var m = Margin(instruments, d);
            if (m < best.MarginLinewidths) best = new MarginPoint(d, m);
        }

        return best;
    }

    /// <summary>As the overload without a buffer, reusing <paramref name="buffer"/> for the candidate shifts.</summary>
    public static MarginPoint LowestAlias(IReadOnlyList<Instrument> instruments, double fromHz, double toHz, List<double> buffer)
    {
        CollectVertices(instruments, fromHz, toHz, buffer);
        var i = 0;
        var m = Margin(instruments, buffer[0]);
        // skip the rising flank: advance while the next vertex is not lower
        while (i + 1 < buffer.Count)
        {
            var next = Margin(instruments, buffer[i + 1]);
            if (next < m) break;
            i++;
            m = next;
        }

        if (i + 1 == buffer.Count) return new MarginPoint(buffer[^1], m);
        var best = new MarginPoint(double.NaN, double.PositiveInfinity);
        for (var j = i + 1; j < buffer.Count; j++)
        {
            var d = buffer[j];
            var v = Margin(instruments, d);
            if (v < best.MarginLinewidths) best = new MarginPoint(d, v);
        }

        return best;
    }

    /// <summary>Fills <paramref name="buffer"/> with the sorted corners of the margin over [from, to].</summary>
    public static void CollectVertices(IReadOnlyList<Instrument> instruments, double fromHz, double toHz, List<double> buffer)
    {
        RequireInstruments(instruments);
        if (!double.IsFinite(fromHz) || !double.IsFinite(toHz) || !(toHz >= fromHz))
            throw new ArgumentException($"the range must be finite and ordered but got {fromHz} Hz to {toHz} Hz");
        buffer.Clear();
        var kinks = new List<double> { fromHz, toHz };
        foreach (var inst in instruments)
        {
            var half = inst.FsrHz / 2;
            var first = (long)Math.Ceiling(fromHz / half);
            var last = (long)Math.Floor(toHz / half);
            if (last - first > 20_000_000)
                throw new InputException($"the range {Units.Quantity.FormatFrequency(fromHz)} to {Units.Quantity.FormatFrequency(toHz)} spans {(last - first) / 2} FSRs of '{inst.Name}' ({Units.Quantity.FormatFrequency(inst.FsrHz)}), more than the 10 million the margin is evaluated over");
            for (var j = first; j <= last; j++)
            {
                var d = j * half;
                if (d > fromHz && d < toHz) kinks.Add(d);
            }
        }

        kinks.Sort();
        var n = instruments.Count;
        var centre = new double[n];
        var slope = new double[n];
        var crossings = new List<double>();
        for (var i = 0; i < kinks.Count; i++)
        {
            var a = kinks[i];
            if (buffer.Count == 0 || a > buffer[^1]) buffer.Add(a);
            if (i + 1 == kinks.Count) break;
            var b = kinks[i + 1];
            if (!(b > a)) continue;
            // inside (a, b) misfit_k(Δ) = slope_k·(Δ − centre_k) with centre_k the nearest multiple of FSR_k
            var mid = 0.5 * (a + b);
            for (var k = 0; k < n; k++)
            {
                var f = instruments[k].FsrHz;
                centre[k] = Math.Round(mid / f) * f;
                slope[k] = (mid >= centre[k] ? 1.0 : -1.0) / instruments[k].LinewidthHz;
            }

            crossings.Clear();
            for (var p = 0; p < n; p++)
            for (var q = p + 1; q < n; q++)
            {
                var ds = slope[p] - slope[q];
                if (ds == 0) continue;
                var x = (slope[p] * centre[p] - slope[q] * centre[q]) / ds;
                if (x > a && x < b) crossings.Add(x);
            }

            crossings.Sort();
            foreach (var x in crossings)
                if (x > buffer[^1]) buffer.Add(x);
        }
    }

    private static void RequireInstruments(IReadOnlyList<Instrument> instruments)
    {
        ArgumentNullException.ThrowIfNull(instruments);
        if (instruments.Count == 0) throw new ArgumentException("no instruments", nameof(instruments));
    }
}
