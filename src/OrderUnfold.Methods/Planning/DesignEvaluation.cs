using OrderUnfold.Analysis;
using OrderUnfold.Instruments;

namespace OrderUnfold.Planning;

/// <summary>How a design fared.</summary>
public enum DesignVerdict
{
    /// <summary>The margin stays at or above the threshold over the span for every length within tolerance.</summary>
    Ok,

    /// <summary>The nominal lengths pass, but some length within the tolerance falls below the threshold.</summary>
    FailsWithinTolerance,

    /// <summary>Already the nominal lengths have a near-coincidence below the threshold inside the span.</summary>
    Aliased,

    /// <summary>The FSRs have a common period (within tolerance) inside the span: an exact alias.</summary>
    RepeatsWithinSpan,
}

/// <summary>The alias analysis of one set of cavities over the span. Margins are in linewidths, shifts in Hz.</summary>
public sealed record DesignEvaluation
{
    /// <summary>The cavities, reference first.</summary>
    public required IReadOnlyList<DesignCavity> Cavities { get; init; }

    /// <summary>The cavities as instruments at their nominal lengths.</summary>
    public IReadOnlyList<Instrument> Instruments => Cavities.Select(c => c.Instrument).ToList();

    /// <summary>Smallest shift counted as an alias, Hz (the lower end of the searched range).</summary>
    public required double MinimumShiftHz { get; init; }

    /// <summary>Upper end of the searched range (the span), Hz.</summary>
    public required double SpanHz { get; init; }

    /// <summary>Required margin, linewidths.</summary>
    public required double ThresholdLinewidths { get; init; }

    /// <summary>Worst alias at the nominal lengths: the smallest margin over the range beyond the flank of the
    /// central peak (<see cref="AliasMargin.LowestAlias(IReadOnlyList{Instrument}, double, double)"/>), and where.</summary>
    public required MarginPoint Nominal { get; init; }

    /// <summary>Worst alias over the range and over every sampled length within tolerance, and where.
    /// Equal to <see cref="Nominal"/> when no cavity has a tolerance.</summary>
    public required MarginPoint Robust { get; init; }

    /// <summary>Cavity lengths (m; null for cavities given by FSR) at which <see cref="Robust"/> occurs.</summary>
    public required IReadOnlyList<double?> RobustLengthsM { get; init; }

    /// <summary>Lengths sampled per tolerance band (1 when there is no tolerance).</summary>
    public required IReadOnlyList<int> ToleranceSamples { get; init; }

    /// <summary>First-order bound on how far the worst margin over the whole tolerance band can lie below
    /// <see cref="Robust"/> (the sampled worst), in linewidths; 0 without tolerance.</summary>
    public required double SamplingErrorBoundLinewidths { get; init; }

    /// <summary>First shift in the range at which the nominal margin drops below the threshold, or null when it
    /// does not within the span (the design is unambiguous over the span).</summary>
    public double? FirstAliasHz { get; init; }

    /// <summary>The first common period of the FSRs (ratios within tolerance of a fraction), or null when there
    /// is none up to <see cref="RepeatSearchLimitHz"/>.</summary>
    public ExactRepeat? Repeat { get; init; }

    /// <summary>How far the common period was searched, Hz.</summary>
    public required double RepeatSearchLimitHz { get; init; }

    /// <summary>Peak SNR needed to reject the worst alias (see <see cref="AliasSnr"/>); infinite for an exact alias.</summary>
    public required double RequiredPeakSnr { get; init; }

    /// <summary>The judgement.</summary>
    public required DesignVerdict Verdict { get; init; }

    /// <summary>True when <see cref="Verdict"/> is <see cref="DesignVerdict.Ok"/>.</summary>
    public bool Passes => Verdict == DesignVerdict.Ok;

    /// <summary>The cavities after the reference (the ones being planned).</summary>
    public IReadOnlyList<DesignCavity> Added => Cavities.Skip(1).ToList();

    /// <summary>The verdict in words.</summary>
    public string VerdictText => Verdict switch
    {
        DesignVerdict.Ok => "ok",
        DesignVerdict.FailsWithinTolerance => "fails within tolerance",
        DesignVerdict.Aliased => "alias in span",
        _ => "repeats in span",
    };
}
