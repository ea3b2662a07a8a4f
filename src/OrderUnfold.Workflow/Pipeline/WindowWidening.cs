using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Units;

namespace OrderUnfold.Pipeline;

/// <summary>What the window check found and did.</summary>
/// <param name="Reason">Why the source looked wider than the first window.</param>
/// <param name="FirstStartHz">First window, start (relative to the first solve's anchor), Hz.</param>
/// <param name="FirstEndHz">First window, end, Hz.</param>
/// <param name="HalfWidthHz">Half width of the widened window, Hz.</param>
/// <param name="NearAliases">Shifts inside the widened window at which a line can be taken for another (margin below the
/// alias threshold), with their margins.</param>
/// <param name="StillWider">True when lines still sit at the edges of the widened window: the source is wider than the
/// instruments can unfold, and orders are not resolved.</param>
public sealed record WindowFinding(string Reason, double FirstStartHz, double FirstEndHz, double HalfWidthHz, IReadOnlyList<MarginPoint> NearAliases, bool StillWider);

/// <summary>
/// A source wider than the default window (the range up to the first near-alias of the instruments) is folded into it
/// without a word unless something looks: its lines then pile up at the window's edges, where lines from outside
/// fold in. When that happens, the window is widened once, as far as the instruments can tell a shift from zero at
/// all (the alias margin stays above <see cref="FarThresholdLinewidths"/> linewidth: beyond that the pattern repeats
/// almost exactly) and the memory allows; the near-aliases inside it are named, and the line refinement's order check
/// marks the lines they leave doubtful. When lines still sit at the edges of the widened window, the result is
/// reported as folded: orders not resolved.
/// </summary>
public static class WindowWidening
{
    /// <summary>A line closer than this many linewidths to an edge of the window counts as a line at the edge.</summary>
    public const double EdgeLinewidths = 3;

    /// <summary>Smallest intensity (relative to the strongest line) of a line at the edge that counts as a sign of folding.</summary>
    public const double EdgeMinIntensity = 0.05;

    /// <summary>Smallest SNR of a line at the edge that counts as a sign of folding.</summary>
    public const double EdgeMinSnr = 20;

    /// <summary>Margin below which two shifts are taken as indistinguishable: the widened window stops there.</summary>
    public const double FarThresholdLinewidths = 1;

    /// <summary>Why the result looks like a source wider than its window, or null when it does not.</summary>
    public static string? WiderThanWindow(UnfoldResult result, double linewidthHz)
    {
        if (!result.OrdersResolved || result.Lines.Count == 0) return null;
        var lo = result.Grid.StartHz;
        var hi = result.Grid.EndHz;
        // only clear lines count: weak ones at the edges are what a slightly imperfect model leaves anywhere
        var atEdge = result.Lines.Where(l => l.Intensity >= EdgeMinIntensity && l.Snr >= EdgeMinSnr)
            .Where(l => l.FrequencyHz - lo < EdgeLinewidths * linewidthHz || hi - l.FrequencyHz < EdgeLinewidths * linewidthHz).ToList();
        if (atEdge.Count == 0) return null;
        return $"{atEdge.Count} line(s) at the edges of the window ({Quantity.FormatFrequency(lo)} to {Quantity.FormatFrequency(hi)}), where lines from outside it fold in";
    }

    /// <summary>Half width of the widest window the instruments can unfold, within the bin limit.</summary>
    public static double WidestHalfWidth(IReadOnlyList<Instrument> instruments, double stepHz, int maxBins, double aliasThreshold)
    {
        var limit = maxBins * stepHz / 2;
        var from = AliasMargin.DefaultMinimumShiftHz(instruments, aliasThreshold);
        var first = AliasMargin.FirstBelow(instruments, FarThresholdLinewidths, from, limit) ?? limit;
        return Math.Min(first, limit);
    }

    /// <summary>Runs the unfold, and again on a widened window when the first result looks folded.</summary>
    public static (UnfoldResult Result, WindowFinding? Finding) Run(Func<UnfoldOptions, UnfoldResult> unfold, UnfoldOptions options,
        IReadOnlyList<Instrument> instruments, IProgress<string>? progress)
    {
        var first = unfold(options);
        var narrowest = instruments.Min(i => i.LinewidthHz);
        if (options.WindowStartHz is not null || options.WindowEndHz is not null || instruments.DistinctBy(i => i.FsrHz).Count() < 2) return (first, null);
        // a first fit the model cannot explain at all is refused right after this stage (RunChecks.RefuseMismatch): its
        // lines at the edges are the model absorbing the mismatch, not lines folding in from outside (a strong line outside
        // the window leaves a reduced χ² of about 3 on simulated sweeps, not 60), and a widened solve would cost as much
        // again for the same refusal
        if (first.Sweeps.Any(s => s.ReducedChiSquare > UnfoldPipeline.MismatchReducedChiSquare)) return (first, null);
        var reason = WiderThanWindow(first, narrowest);
        if (reason is null) return (first, null);
        var step = first.Grid.StepHz;
        var distinct = instruments.DistinctBy(i => i.FsrHz).ToList();
        var half = WidestHalfWidth(distinct, step, options.MaxGridBins, options.AliasThresholdLinewidths);
        var firstHalf = (first.Grid.EndHz - first.Grid.StartHz) / 2;
        if (!(half > 1.2 * firstHalf))
            return (Folded(first, reason, "the window is already as wide as the instruments (or the bin limit) allow"), new WindowFinding(reason, first.Grid.StartHz, first.Grid.EndHz, firstHalf, [], true));
        progress?.Report($"the source looks wider than the window ({reason}); widening it to ±{Quantity.FormatFrequency(half)}");
        var widened = unfold(options with { WindowStartHz = -half, WindowEndHz = half });
        var aliases = AliasMargin.Aliases(distinct, options.AliasThresholdLinewidths, AliasMargin.DefaultMinimumShiftHz(distinct, options.AliasThresholdLinewidths), 2 * half);
        var still = WiderThanWindow(widened, narrowest);
        var warnings = widened.Warnings.ToList();
        warnings.Add($"the source looked wider than the first window ({reason}); the window was widened to ±{Quantity.FormatFrequency(half)}, as far as the instruments can tell a shift from zero" +
                     (aliases.Count > 0
                         ? $"; inside it, lines {string.Join(", ", aliases.Take(6).Select(a => $"{Quantity.FormatFrequency(a.DeltaHz)} apart (margin {a.MarginLinewidths:F1} linewidths)"))}{(aliases.Count > 6 ? $" and {aliases.Count - 6} more" : "")} can be taken for one another: a line's order is only as secure as its order check says"
                         : ""));
        var result = widened with { Warnings = warnings };
        if (still is not null) result = Folded(result, still, "even the widened window does not hold the source");
        return (result, new WindowFinding(reason, first.Grid.StartHz, first.Grid.EndHz, half, aliases, still is not null));
    }

    /// <summary>The result reported as folded: orders not resolved, with the reason.</summary>
    private static UnfoldResult Folded(UnfoldResult r, string reason, string why)
    {
        var warnings = r.Warnings.ToList();
        warnings.Add($"the source is wider than the window ({reason}; {why}): lines from outside fold into it, so the orders of the lines are not resolved and their frequencies are known only modulo the instruments' common period");
        return r with { OrdersResolved = false, Warnings = warnings };
    }
}
