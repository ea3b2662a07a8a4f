namespace OrderUnfold.Analysis.Modes;

/// <summary>
/// Policies of the mode analysis. Every field has a default; the record is immutable (use <c>with</c>).
/// </summary>
public sealed record ModeAnalysisOptions
{
    /// <summary>Lines within this many dB of the strongest are counted as running modes (default 20 dB).</summary>
    public double WithinDb { get; init; } = 20;

    /// <summary>Group index of the laser medium; with it the physical length L = c / (2 n_g Δ) is reported.</summary>
    public double? GroupIndex { get; init; }

    /// <summary>Fewest lines (the strongest included) that count as a comb; with fewer, no spacing is reported
    /// (default 2: a two-mode laser has a spacing, though it cannot be checked against a comb).</summary>
    public int MinModesForComb { get; init; } = 2;

    /// <summary>
    /// Tolerance of comb membership as a fraction of the comb step (default 0.02). A line belongs to a comb
    /// slot when its distance from the slot is within max(<see cref="SigmaTolerance"/>·σ, this·step), but never
    /// more than a quarter of the step.
    /// </summary>
    public double CombToleranceFraction { get; init; } = 0.02;

    /// <summary>Tolerance of comb membership in units of the line's frequency sigma (default 4).</summary>
    public double SigmaTolerance { get; init; } = 4;

    /// <summary>
    /// Cost of one empty slot inside the comb (default 0.3). A comb candidate scores Σ (P/P_max)^½ over its members
    /// minus this cost per empty slot between its first and last member: a comb of half the spacing (half its
    /// slots empty) does not win, one or two missing modes cost less than leaving their strong neighbours out,
    /// and a weak line halfway between two modes does not pay for the empty slot it would open.
    /// </summary>
    public double MissingSlotCost { get; init; } = 0.3;

    /// <summary>Folded case only: the laser's mode spacing is known to be at least this (Hz).</summary>
    public double? SpacingMinHz { get; init; }

    /// <summary>Folded case only: the laser's mode spacing is known to be at most this (Hz).</summary>
    public double? SpacingMaxHz { get; init; }

    /// <summary>Folded case: how many spacing candidates to list when no spacing range is given (default 12).</summary>
    public int FoldedCandidatesListed { get; init; } = 12;

    /// <summary>Folded case: largest divisor j of the candidates (δ + m·FSR)/j, i.e. every j-th mode seen (default 3).</summary>
    public int FoldedMaxDivisor { get; init; } = 3;

    /// <summary>Throws <see cref="InputException"/> when an option is out of range.</summary>
    public void Validate()
    {
        if (!(WithinDb > 0) || !double.IsFinite(WithinDb))
            throw new InputException($"the level for counting modes must be a positive number of dB but got {WithinDb} dB");
        if (GroupIndex is { } n && !(n > 0 && double.IsFinite(n)))
            throw new InputException($"the group index must be a positive number but got {n}");
        if (MinModesForComb < 2)
            throw new InputException($"a comb needs at least 2 modes but the minimum was set to {MinModesForComb}");
        if (!(CombToleranceFraction > 0 && CombToleranceFraction <= 0.25))
            throw new InputException($"the comb tolerance is a fraction of the spacing in (0, 0.25] but got {CombToleranceFraction}");
        if (!(SigmaTolerance > 0) || !double.IsFinite(SigmaTolerance))
            throw new InputException($"the sigma tolerance must be positive but got {SigmaTolerance}");
        if (!(MissingSlotCost >= 0) || !double.IsFinite(MissingSlotCost))
            throw new InputException($"the cost of a missing slot must be ≥ 0 but got {MissingSlotCost}");
        if (SpacingMinHz is { } lo && !(lo >= 0 && double.IsFinite(lo)))
            throw new InputException($"the smallest spacing must be a frequency ≥ 0 but got {lo} Hz");
        if (SpacingMaxHz is { } hi && !(hi > 0 && double.IsFinite(hi)))
            throw new InputException($"the largest spacing must be a positive frequency but got {hi} Hz");
        if (SpacingMinHz is { } a && SpacingMaxHz is { } b && a >= b)
            throw new InputException($"the spacing range is empty: smallest {a} Hz is not below largest {b} Hz");
        if (FoldedCandidatesListed < 1)
            throw new InputException($"at least one spacing candidate must be listed but got {FoldedCandidatesListed}");
        if (FoldedMaxDivisor < 1)
            throw new InputException($"the largest divisor must be at least 1 but got {FoldedMaxDivisor}");
    }
}
