using OrderUnfold.Instruments;

namespace OrderUnfold.Analysis;

/// <summary>
/// How well a set of instruments tells a frequency shift Δ apart from zero. In instrument k the misfit of Δ
/// is the distance from Δ to the nearest multiple of FSR_k, in units of that instrument's linewidth; the
/// alias margin is the largest misfit over the instruments (a line moved by Δ looks the same in every
/// instrument only when all misfits are small).
/// </summary>
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
}
