using OrderUnfold.Inversion;

namespace OrderUnfold.Analysis;

/// <summary>A line of the refinement followed from its grid cluster: its grid values, how far it may wander, whether its
/// position is pinned, and the notes it has collected.</summary>
internal sealed class TrackedLine(UnfoldedLine grid, double gridPositionHz, double gridIntensity, double toleranceHz)
{
    /// <summary>The grid line it started from.</summary>
    public UnfoldedLine Grid { get; } = grid;

    /// <summary>Its grid position in the refinement's frequency origin.</summary>
    public double GridPositionHz { get; } = gridPositionHz;

    /// <summary>Its grid intensity (raw).</summary>
    public double GridIntensity { get; } = gridIntensity;

    /// <summary>How far the refined position may lie from the grid position before the line is pinned.</summary>
    public double ToleranceHz { get; } = toleranceHz;

    /// <summary>True when its position is held at the grid value.</summary>
    public bool Pinned { get; set; }

    /// <summary>First grid bin of its cluster (grown by merges).</summary>
    public int FirstBin { get; set; } = grid.FirstBin;

    /// <summary>Last grid bin of its cluster (grown by merges).</summary>
    public int LastBin { get; set; } = grid.LastBin;

    /// <summary>Notes for the report.</summary>
    public List<string> Notes { get; } = [];
}

/// <summary>
/// The changes one refinement round makes to the line set after a fit: pin wanderers, merge collapsed pairs, drop
/// insignificant lines — one change per independent line group (groups share no sample within the Jacobian cutoff, so a
/// change in one cannot alter the other's verdict beyond the shared sweep parameters). Positions and intensities of
/// pinned and merged lines are changed in <paramref name="parameters"/> in place; removed lines are listed in
/// <see cref="Removed"/> for the caller to take out.
/// </summary>
internal sealed class LineSetEdits(ParameterLayout layout, double[] parameters, List<TrackedLine> tracked, int[] groups)
{
    /// <summary>With the weakest insignificant line of a group, the round also drops every other line of that group whose
    /// z² is below this fraction of the detection threshold (so that a grid that absorbed a mismatch with dozens of weak
    /// lines is pruned in a few rounds, not one line per round; backward elimination in steps, common practice; the
    /// quarter is chosen: z² a quarter of the threshold is half its z).</summary>
    private const double FarBelowFraction = 0.25;

    private readonly HashSet<int> _changedGroups = [];

    /// <summary>Lines to remove (indices in the current layout; may repeat).</summary>
    public List<int> Removed { get; } = [];

    /// <summary>True when any group changed this round.</summary>
    public bool Changed => _changedGroups.Count > 0;

    /// <summary>Lines pinned this round.</summary>
    public int Pinned { get; private set; }

    /// <summary>Pairs merged this round.</summary>
    public int Merged { get; private set; }

    /// <summary>Lines dropped this round.</summary>
    public int Dropped { get; private set; }

    /// <summary>1. A line that left its grid cluster: its position is pinned at the grid value.</summary>
    public void PinWanderers()
    {
        for (var j = 0; j < layout.LineCount; j++)
        {
            var nu = layout.Position(j);
            if (tracked[j].Pinned || _changedGroups.Contains(groups[j]) || Math.Abs(parameters[nu] - tracked[j].GridPositionHz) <= tracked[j].ToleranceHz) continue;
            var t = tracked[j];
            t.Pinned = true;
            t.Notes.Add($"the refinement moved this line by {Quantity.FormatFrequency(parameters[nu] - t.GridPositionHz, 3)}, out of its grid cluster: position kept at the grid value (no frequency uncertainty)");
            parameters[nu] = t.GridPositionHz;
            parameters[layout.Intensity(j)] = t.GridIntensity;
            Pinned++;
            _changedGroups.Add(groups[j]);
        }
    }

    /// <summary>2. Two lines that collapsed onto each other (closer than <paramref name="mergeHz"/>; always one group) are
    /// merged: intensity-weighted position, summed intensity.</summary>
    public void MergeCollapsedPairs(double mergeHz, double mergeLinewidths)
    {
        foreach (var (i1, i2, sep) in ClosestPairs())
        {
            if (_changedGroups.Contains(groups[i1]) || sep >= mergeHz) continue;
            var (keep, lose) = parameters[layout.Intensity(i1)] >= parameters[layout.Intensity(i2)] ? (i1, i2) : (i2, i1);
            double ak = parameters[layout.Intensity(keep)], al = parameters[layout.Intensity(lose)];
            if (ak > 0 && al > 0)
                parameters[layout.Position(keep)] = (ak * parameters[layout.Position(keep)] + al * parameters[layout.Position(lose)]) / (ak + al);
            parameters[layout.Intensity(keep)] = Math.Max(ak, 0) + Math.Max(al, 0);
            if (layout.FitsWidths)
                parameters[layout.Width(keep)] = Math.Max(Math.Abs(parameters[layout.Width(keep)]), Math.Abs(parameters[layout.Width(lose)]));
            var tk = tracked[keep];
            var tl = tracked[lose];
            tk.Notes.Add($"merged with a second line {Quantity.FormatFrequency(sep, 3)} away (closer than {mergeLinewidths:G3} linewidth): the two cannot be told apart");
            tk.Notes.AddRange(tl.Notes);
            tk.FirstBin = Math.Min(tk.FirstBin, tl.FirstBin);
            tk.LastBin = Math.Max(tk.LastBin, tl.LastBin);
            tk.Pinned &= tl.Pinned;
            Removed.Add(lose);
            Merged++;
            _changedGroups.Add(groups[i1]);
        }
    }

    /// <summary>3. The weakest line of a group below the detection threshold (Wald test with the χ²-scaled covariance of
    /// <paramref name="fit"/>) is dropped, with every other line of that group far below it.</summary>
    public void DropInsignificant(LineFitResult fit, double threshold)
    {
        foreach (var weakest in WeakestInsignificantPerGroup(fit, threshold))
        {
            if (_changedGroups.Contains(groups[weakest])) continue;
            Removed.Add(weakest);
            Dropped++;
            foreach (var j in Enumerable.Range(0, layout.LineCount).Where(j => j != weakest && groups[j] == groups[weakest] && FarBelow(fit, threshold, j)))
            {
                Removed.Add(j);
                Dropped++;
            }

            _changedGroups.Add(groups[weakest]);
        }
    }

    /// <summary>Pairs of lines of one group, each group's closest pair only, with their separation.</summary>
    private IEnumerable<(int First, int Second, double SeparationHz)> ClosestPairs()
    {
        foreach (var members in Enumerable.Range(0, layout.LineCount).GroupBy(j => groups[j]))
        {
            var m = members.ToArray();
            (int, int, double)? best = null;
            for (var a = 0; a < m.Length; a++)
            for (var b = a + 1; b < m.Length; b++)
            {
                var d = Math.Abs(parameters[layout.Position(m[a])] - parameters[layout.Position(m[b])]);
                if (best is null || d < best.Value.Item3) best = (m[a], m[b], d);
            }

            if (best is not null) yield return best.Value;
        }
    }

    /// <summary>Per line group, the line with the smallest Wald statistic z = a/σ_a (χ²-scaled covariance) when z² is below
    /// the threshold or a ≤ 0. Lines whose σ_a is undetermined are never chosen.</summary>
    private IEnumerable<int> WeakestInsignificantPerGroup(LineFitResult fit, double threshold)
    {
        foreach (var members in Enumerable.Range(0, layout.LineCount).GroupBy(j => groups[j]))
        {
            var weakest = WeakestInsignificant(fit, threshold, members);
            if (weakest >= 0) yield return weakest;
        }
    }

    /// <summary>The line of <paramref name="members"/> with the smallest Wald statistic z = a/σ_a when z² is below the
    /// threshold or a ≤ 0; −1 when every line is significant. Lines whose σ_a is undetermined are never chosen.</summary>
    private int WeakestInsignificant(LineFitResult fit, double threshold, IEnumerable<int> members)
    {
        var weakest = -1;
        var zMin = double.PositiveInfinity;
        foreach (var j in members)
        {
            var a = fit.Parameters[layout.Intensity(j)];
            var va = fit.ScaledCovariance[layout.Intensity(j), layout.Intensity(j)];
            var z = a <= 0 ? double.NegativeInfinity : double.IsFinite(va) && va > 0 ? a / Math.Sqrt(va) : double.NaN;
            if (double.IsNaN(z)) continue; // undetermined: kept, with a note
            if (z < zMin)
            {
                zMin = z;
                weakest = j;
            }
        }

        return weakest >= 0 && (zMin <= 0 || zMin * zMin < threshold) ? weakest : -1;
    }

    /// <summary>True when line j's Wald statistic is far below the detection threshold (z² under
    /// <see cref="FarBelowFraction"/> of it, or a ≤ 0).</summary>
    private bool FarBelow(LineFitResult fit, double threshold, int j)
    {
        var a = fit.Parameters[layout.Intensity(j)];
        var va = fit.ScaledCovariance[layout.Intensity(j), layout.Intensity(j)];
        if (a <= 0) return true;
        if (!(double.IsFinite(va) && va > 0)) return false;
        return a * a / va < threshold * FarBelowFraction;
    }
}
