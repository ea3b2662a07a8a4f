using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Units;

namespace OrderUnfold.Calibration;

/// <summary>
/// The FSR refinement's first stage, before any unfold: coarse scale corrections of each instrument from where its peaks
/// fold to (a known interval's partners, or the Vernier ratio to the reference that explains every folded peak).
/// </summary>
internal static class FsrPrescan
{
    private sealed record Feature(double U, double Height, int Count);

    internal sealed record PrescanResult(Dictionary<string, double> Scales, Dictionary<string, string> Basis, List<string> Notes, List<string> Warnings);

    /// <summary>
    /// Coarse FSR corrections from the folded peak positions of each instrument (relative to its strongest
    /// peak), before any unfold. With a known interval Δ, the partner of the strongest line at ±mΔ must sit at
    /// the folded position (±mΔ/s) mod FSR for the instrument's scale correction s; the candidates that agree
    /// give s. Without one, the ratio to the reference is scanned: at the right ratio every folded peak of
    /// either instrument is explained by some order of a peak of the other.
    /// </summary>
    internal static PrescanResult Run(IReadOnlyList<CalibratedSweep> sweeps, UnfoldOptions unfoldOptions, FsrRefineOptions options, bool ratio)
    {
        var names = sweeps.Select(s => s.Instrument.Name).Distinct().ToList();
        var reference = options.ReferenceInstrument ?? names[0];
        var scales = new Dictionary<string, double>();
        var basis = new Dictionary<string, string>();
        var notes = new List<string>();
        var warnings = new List<string>();
        var features = names.ToDictionary(n => n, n => Folded(sweeps.Where(s => s.Instrument.Name == n).ToList()));
        var inst = names.ToDictionary(n => n, n => sweeps.First(s => s.Instrument.Name == n).Instrument);

        if (options.KnownIntervalHz is double known)
        {
            foreach (var n in names)
            {
                var s = IntervalScale(features[n], inst[n], known, options);
                if (s is double v)
                {
                    scales[n] = v;
                    basis[n] = "known interval (folded peaks)";
                    notes.Add($"pre-scan: '{n}' sees the known interval {Quantity.FormatFrequency(known)} at a scale {(v - 1) * 100:+0.000;-0.000} % from its stated FSR");
                }
            }
        }

        if (ratio)
        {
            var window = Math.Max(Math.Abs(unfoldOptions.WindowStartHz ?? 0), Math.Abs(unfoldOptions.WindowEndHz ?? 0));
            if (!(window > 0)) window = DefaultReach(inst.Values.ToList());
            foreach (var n in names.Where(n => n != reference && !scales.ContainsKey(n)))
            {
                var refScale = scales.GetValueOrDefault(reference, 1.0);
                var eps = RatioScan(features[reference], inst[reference].FsrHz * refScale, features[n], inst[n], window, options.MaxScaleError, out var ambiguous);
                if (ambiguous)
                {
                    warnings.Add($"the FSR ratio of '{n}' to '{reference}' could not be pinned by the folded peaks alone (several ratios explain them); the stated FSRs were kept for the first unfold");
                    continue;
                }

                if (eps is double e && e != 0)
                {
                    scales[n] = refScale * (1 + e);
                    basis[n] = $"Vernier ratio to '{reference}' (folded peaks)";
                    notes.Add($"pre-scan: the folded peaks of '{n}' and '{reference}' agree best with '{n}' scaled by {e * 100:+0.000;-0.000} %");
                }
            }
        }

        return new PrescanResult(scales, basis, notes, warnings);
    }

    /// <summary>Peaks of an instrument's sweeps folded into one FSR, relative to the strongest, merged over repeats and sweeps.</summary>
    private static List<Feature> Folded(List<CalibratedSweep> group)
    {
        var inst = group[0].Instrument;
        var fsr = inst.FsrHz;
        var tol = 0.5 * inst.LinewidthHz;
        var raw = new List<(double U, double H)>();
        foreach (var s in group)
        {
            var idx = Enumerable.Range(0, s.Signal.Length).Select(i => (double)i).ToArray();
            var peaks = ResolvedPeaks.Find(idx, s.Signal, 0.03, 6);
            if (peaks.Count == 0) continue;
            var top = peaks.Max(p => p.Height);
            foreach (var p in peaks)
                raw.Add((SweepOperator.PositiveMod(PeakFinder.Interpolate(s.ScanHz, p.Position), fsr), p.Height / top));
        }

        if (raw.Count == 0) return [];
        raw.Sort((a, b) => a.U.CompareTo(b.U));
        var clusters = new List<List<(double U, double H)>>();
        foreach (var r in raw)
        {
            if (clusters.Count > 0 && r.U - clusters[^1][^1].U < tol) clusters[^1].Add(r);
            else clusters.Add([r]);
        }

        if (clusters.Count > 1 && clusters[0][0].U + fsr - clusters[^1][^1].U < tol)
        {
            clusters[0].AddRange(clusters[^1].Select(c => (c.U - fsr, c.H)));
            clusters.RemoveAt(clusters.Count - 1);
        }

        var list = clusters.Select(c => new Feature(c.Average(v => v.U), c.Average(v => v.H), c.Count)).ToList();
        var anchor = list.Where(f => f.Count >= 2).DefaultIfEmpty(list[0]).MaxBy(f => f.Height)!;
        return list.Select(f => f with { U = Wrap(f.U - anchor.U, fsr) }).OrderByDescending(f => f.Height).ToList();
    }

    /// <summary>Scale correction s of one instrument from where the partners of the strongest line fold to.</summary>
    private static double? IntervalScale(List<Feature> features, Instrument inst, double known, FsrRefineOptions options)
    {
        var fsr = inst.FsrHz;
        var tol = 0.5 * inst.LinewidthHz;
        var cands = new List<(double S, double W, int Key)>();
        for (var m = 1; m <= options.MaxIntervalMultiple; m++)
            foreach (var sign in new[] { -1, 1 })
            {
                var nu = sign * m * known;
                var reach = options.MaxScaleError * Math.Abs(nu) + 2 * tol;
                if (reach >= fsr / 2) continue; // the partner could fold anywhere: no information
                var predicted = Wrap(nu, fsr);
                foreach (var f in features)
                {
                    if (Math.Abs(f.U) < tol) continue; // the anchor itself
                    if (Math.Abs(Wrap(f.U - predicted, fsr)) > reach) continue;
                    var order = Math.Round((nu - f.U) / fsr);
                    var s = nu / (order * fsr + f.U);
                    cands.Add((s, f.Height * f.Count * nu * nu, sign * m));
                }
            }

        if (cands.Count == 0) return null;
        // the group of candidates that agree within the position tolerance, supported by the most distinct partners
        List<(double S, double W, int Key)> best = [];
        var bestScore = 0.0;
        foreach (var c in cands)
        {
            var group = cands.Where(o => Math.Abs(o.S - c.S) <= 2 * tol / known).ToList();
            var score = group.Select(g => g.Key).Distinct().Count() + 1e-3 * group.Sum(g => g.W) / cands.Sum(g => g.W);
            if (score > bestScore)
            {
                bestScore = score;
                best = group;
            }
        }

        if (best.Select(g => g.Key).Distinct().Count() < Math.Min(2, cands.Select(c => c.Key).Distinct().Count())) return null;
        return best.Sum(g => g.S * g.W) / best.Sum(g => g.W);
    }

    /// <summary>
    /// Scans the scale ε of instrument b against the reference a: at the right ε every folded peak of either is
    /// explained by some order (within the window) of a folded peak of the other. Returns the centre of the best
    /// plateau; <paramref name="ambiguous"/> when another plateau scores as well.
    /// </summary>
    private static double? RatioScan(List<Feature> a, double fsrA, List<Feature> b, Instrument instB, double window, double maxError, out bool ambiguous)
    {
        ambiguous = false;
        if (a.Count < 2 || b.Count < 2) return null;
        var tol = 0.5 * instB.LinewidthHz;
        var step = Math.Max(1e-6, 0.5 * tol / window);
        var count = (int)Math.Ceiling(maxError / step);
        var scores = new double[2 * count + 1];
        for (var k = -count; k <= count; k++)
        {
            var e = k * step;
            var fsrB = instB.FsrHz * (1 + e);
            scores[k + count] = Explained(a, fsrA, b.Select(f => f with { U = f.U * (1 + e) }).ToList(), fsrB, window, tol)
                                + Explained(b.Select(f => f with { U = f.U * (1 + e) }).ToList(), fsrB, a, fsrA, window, tol);
        }

        var max = scores.Max();
        // plateaus of the maximum score
        var plateaus = new List<(int Start, int End)>();
        for (var i = 0; i < scores.Length; i++)
        {
            if (scores[i] < max - 1e-9) continue;
            if (plateaus.Count > 0 && plateaus[^1].End == i - 1) plateaus[^1] = (plateaus[^1].Start, i);
            else plateaus.Add((i, i));
        }

        var zero = scores[count];
        if (zero >= max - 1e-9) return 0; // the stated ratio explains the peaks as well as any
        if (plateaus.Count > 1)
        {
            ambiguous = true;
            return null;
        }

        var p = plateaus[0];
        return (0.5 * (p.Start + p.End) - count) * step;
    }

    /// <summary>Weight of the features of x (heights) that some order of them, within the window, puts on a feature of y.</summary>
    private static double Explained(List<Feature> x, double fsrX, List<Feature> y, double fsrY, double window, double tol)
    {
        var total = 0.0;
        foreach (var f in x)
        {
            if (Math.Abs(f.U) < tol) continue; // the anchor is explained by construction
            var nMax = (int)Math.Ceiling(window / fsrX) + 1;
            var hit = false;
            for (var n = -nMax; n <= nMax && !hit; n++)
            {
                var nu = f.U + n * fsrX;
                if (Math.Abs(nu) > window) continue;
                var u = Wrap(nu, fsrY);
                foreach (var g in y)
                    if (Math.Abs(Wrap(g.U - u, fsrY)) <= tol)
                    {
                        hit = true;
                        break;
                    }
            }

            if (hit) total += Math.Sqrt(f.Height);
        }

        return total;
    }

    /// <summary>Half the beat range of the instruments, a default reach when no window is given.</summary>
    private static double DefaultReach(List<Instrument> instruments)
    {
        var f = instruments.Select(i => i.FsrHz).OrderBy(v => v).ToList();
        var reach = f[^1] * 4;
        for (var i = 1; i < f.Count; i++) reach = Math.Max(reach, Math.Min(0.5 * f[i] * f[i - 1] / Math.Max(1, f[i] - f[i - 1]), 50 * f[i]));
        return reach;
    }

    private static double Wrap(double v, double period)
    {
        var w = SweepOperator.PositiveMod(v, period);
        return w >= period / 2 ? w - period : w;
    }
}
