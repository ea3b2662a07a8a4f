namespace OrderUnfold.Planning;

/// <summary>How densely a planned measurement samples each cavity's sweep; used only to estimate the
/// signal-to-noise ratio the measurement needs (<see cref="AliasSnr"/>).</summary>
/// <param name="SamplesPerFsr">Samples recorded while the cavity scans one FSR (per ramp direction).</param>
/// <param name="PeakPasses">How many times, over all sweeps of one cavity, the scan carries a line across a
/// transmission peak (e.g. 3 FSRs per direction × 2 directions = 6).</param>
public sealed record SweepSampling(double SamplesPerFsr = 1250, double PeakPasses = 6);

/// <summary>What a design must achieve and how it is judged. SI units.</summary>
public sealed record PlanSettings
{
    /// <summary>Largest frequency shift that must be unambiguous: the span of the source, Hz.</summary>
    public required double SpanHz { get; init; }

    /// <summary>Required alias margin in linewidths (default 3): below it a shifted line is taken to be
    /// confusable with the unshifted one.</summary>
    public double ThresholdLinewidths { get; init; } = 3;

    /// <summary>Shifts below this are the line itself, not an alias (null: 2 × threshold × narrowest linewidth,
    /// see <see cref="AliasMargin.DefaultMinimumShiftHz"/>).</summary>
    public double? MinimumShiftHz { get; init; }

    /// <summary>Tolerance sampling: the lengths inside a tolerance band are sampled densely enough that the
    /// margin of any length in the band is within this many linewidths of a sampled one (first-order bound).</summary>
    public double ToleranceResolutionLinewidths { get; init; } = 0.25;

    /// <summary>At most this many lengths per tolerance band; when the resolution would need more, the
    /// achieved bound is reported in <see cref="DesignEvaluation.SamplingErrorBoundLinewidths"/>.</summary>
    public int MaxToleranceSamples { get; init; } = 33;

    /// <summary>Sampling of the planned sweeps, for the SNR estimate.</summary>
    public SweepSampling Sampling { get; init; } = new();

    /// <summary>The χ² increase an alias must cause to be rejected (default 25, a five-σ distinction).</summary>
    public double RequiredDeltaChiSquare { get; init; } = 25;

    /// <summary>Common periods are searched up to this many FSRs of the first cavity (0: 20 × span / FSR₁, at least 1000).</summary>
    public long RepeatSearchLimit { get; init; }

    /// <summary>Throws <see cref="InputException"/> naming the first setting out of range.</summary>
    public void Validate()
    {
        if (!(SpanHz > 0) || !double.IsFinite(SpanHz)) throw new InputException($"the span to cover must be a positive frequency but got {SpanHz} Hz");
        if (!(ThresholdLinewidths > 0) || !double.IsFinite(ThresholdLinewidths))
            throw new InputException($"the required margin must be a positive number of linewidths but got {ThresholdLinewidths}");
        if (MinimumShiftHz is double m && (!(m >= 0) || !(m < SpanHz)))
            throw new InputException($"the smallest shift counted as an alias must lie between 0 and the span ({SpanHz} Hz) but got {m} Hz");
        if (!(ToleranceResolutionLinewidths > 0)) throw new InputException($"the tolerance resolution must be positive but got {ToleranceResolutionLinewidths}");
        if (MaxToleranceSamples < 2) throw new InputException($"at least 2 lengths per tolerance band are needed but got {MaxToleranceSamples}");
        if (!(Sampling.SamplesPerFsr > 0) || !double.IsFinite(Sampling.SamplesPerFsr))
            throw new InputException($"samples per FSR must be positive but got {Sampling.SamplesPerFsr}");
        if (!(Sampling.PeakPasses > 0) || !double.IsFinite(Sampling.PeakPasses))
            throw new InputException($"peak passes must be positive but got {Sampling.PeakPasses}");
        if (!(RequiredDeltaChiSquare > 0)) throw new InputException($"the required χ² increase must be positive but got {RequiredDeltaChiSquare}");
    }
}
