namespace OrderUnfold.Inversion;

/// <summary>Options of <see cref="Unfolder"/>.</summary>
public sealed record UnfoldOptions
{
    /// <summary>Window relative to the anchor, Hz; null: the unambiguous range of the instruments.</summary>
    public double? WindowStartHz { get; init; }
    /// <summary>End of the window relative to the anchor, Hz; null: the unambiguous range of the instruments.</summary>
    public double? WindowEndHz { get; init; }

    /// <summary>Grid step, Hz; null: a quarter of the narrowest linewidth.</summary>
    public double? GridStepHz { get; init; }

    /// <summary>L1 weight in units of (noise σ × median column norm). 0 gives plain NNLS.</summary>
    public double Sparsity { get; init; } = 3.0;

    /// <summary>First-difference smoothness weight relative to the median squared column norm.</summary>
    public double Smoothness { get; init; }

    /// <summary>Lines below this signal-to-noise ratio are dropped.</summary>
    public double MinSnr { get; init; } = 5.0;

    /// <summary>Candidate offsets per sweep: the pairings of the anchor with this many of its tallest folded peaks, and with
    /// at most this many of its other peaks, the best scores first (<see cref="OffsetSearch"/>).</summary>
    public int OffsetCandidates { get; init; } = 4;

    /// <summary>Most rounds of gain and offset refit after the first joint solve (stops earlier when settled).</summary>
    public int GainRounds { get; init; } = 12;

    /// <summary>Alias margin (in linewidths) below which two shifts count as confusable when choosing the default window.</summary>
    public double AliasThresholdLinewidths { get; init; } = 3.0;

    /// <summary>Which NNLS solver the joint solve uses (the offset search always uses the active set, whose solves are
    /// small). Default: chosen by the problem (see <see cref="NnlsSolver"/>).</summary>
    public SolverChoice Solver { get; init; } = SolverChoice.Auto;

    /// <summary>Largest grid the default window (the unambiguous range) may span; an explicit window is limited by
    /// <see cref="MaxMemoryBytes"/> only.</summary>
    public int MaxGridBins { get; init; } = 200_000;

    /// <summary>Most memory the unfold may need (estimated by <see cref="UnfoldMemory"/> before solving), bytes. Default 4 GB.</summary>
    public long MaxMemoryBytes { get; init; } = 4_000_000_000;

    /// <summary>The fixed numbers of the unfold's stages (grid sampling, stopping rules, warnings); see <see cref="UnfoldThresholds"/>.</summary>
    public UnfoldThresholds Thresholds { get; init; } = new();
}

/// <summary>A line: a cluster of nonzero grid bins.</summary>
/// <param name="FrequencyHz">Intensity-weighted centroid, relative to the anchor line (Hz).</param>
/// <param name="Intensity">Summed intensity relative to the strongest line.</param>
/// <param name="RawIntensity">Summed intensity in the solver's units (gain of the first sweep = 1).</param>
/// <param name="Snr">Intensity over its noise-limited uncertainty.</param>
/// <param name="FirstBin">First grid bin of the cluster.</param>
/// <param name="LastBin">Last grid bin of the cluster.</param>
public sealed record UnfoldedLine(double FrequencyHz, double Intensity, double RawIntensity, double Snr, int FirstBin, int LastBin)
{
    /// <summary>Uncertainty of the relative intensity (from the SNR).</summary>
    public double IntensitySigma => Snr > 0 ? Intensity / Snr : double.NaN;

    /// <summary>Standard uncertainty of the frequency, Hz, when it has been estimated: the statistical part combined with
    /// <see cref="FrequencyAxisSigmaHz"/> when the axis calibration's uncertainty is known.</summary>
    public double? FrequencySigmaHz { get; init; }

    /// <summary>The part of <see cref="FrequencySigmaHz"/> that comes from the uncertainty of the calibrated scan axes, Hz
    /// (null when no axis uncertainty was known).</summary>
    public double? FrequencyAxisSigmaHz { get; init; }

    /// <summary>True when the order of this line is not securely pinned (a near-alias fits almost as well): read from
    /// <see cref="Verdict"/>, the one source of the verdict.</summary>
    public bool Doubtful => Verdict == Analysis.OrderVerdict.Doubtful;

    /// <summary>Cramér–Rao bound of the frequency (relative to the anchor), Hz: the unscaled covariance at the fit.</summary>
    public double? FrequencyCrbHz { get; init; }

    /// <summary>Standard error of the relative intensity from the refinement covariance (overrides the SNR-based value).</summary>
    public double? IntensitySigma2 { get; init; }

    /// <summary>Residual-bootstrap standard error of the frequency, Hz, when a bootstrap was run.</summary>
    public double? BootstrapSigmaHz { get; init; }

    /// <summary>Fitted intrinsic Lorentzian FWHM, Hz (when widths are fitted).</summary>
    public double? WidthHz { get; init; }

    /// <summary>Standard uncertainty of <see cref="WidthHz"/>, Hz.</summary>
    public double? WidthSigmaHz { get; init; }

    /// <summary>Shift to the best alternative placement tried (a near-alias), Hz.</summary>
    public double? AliasShiftHz { get; init; }

    /// <summary>χ² increase when the line is moved to that placement and refitted.</summary>
    public double? AliasDeltaChiSquare { get; init; }

    /// <summary>Order verdict (secure, doubtful, or unknown with one instrument).</summary>
    public Analysis.OrderVerdict Verdict { get; init; }

    /// <summary>Anything the refinement has to say about this line.</summary>
    public string? Note { get; init; }

    /// <summary>Standard error of the relative intensity: from the refinement when available, else from the SNR.</summary>
    public double IntensityError => IntensitySigma2 ?? IntensitySigma;
}

/// <summary>How one sweep is fitted.</summary>
/// <param name="Name">Sweep name.</param>
/// <param name="Instrument">Instrument name.</param>
/// <param name="OffsetHz">Fitted frequency origin φ relative to the anchor.</param>
/// <param name="Gain">Gain relative to the first sweep.</param>
/// <param name="Background">Fitted background, signal units.</param>
/// <param name="NoiseSigma">Noise σ estimated from the data, signal units.</param>
/// <param name="ChiSquare">Σ((y − model)/σ)².</param>
/// <param name="ReducedChiSquare">χ² per degree of freedom.</param>
/// <param name="ResidualRms">RMS of y − model, signal units.</param>
/// <param name="Samples">Number of samples.</param>
public sealed record SweepFit(string Name, string Instrument, double OffsetHz, double Gain, double Background, double NoiseSigma,
    double ChiSquare, double ReducedChiSquare, double ResidualRms, int Samples)
{
    /// <summary>The model at each sample (signal units).</summary>
    public double[] Model { get; init; } = [];
}

/// <summary>Everything one unfold produced.</summary>
public sealed record UnfoldResult
{
    /// <summary>Frequency grid, relative to the anchor line.</summary>
    public required FrequencyGrid Grid { get; init; }

    /// <summary>Recovered intensity per grid bin, relative to the strongest line's summed intensity.</summary>
    public required double[] Spectrum { get; init; }

    /// <summary>The lines found, strongest-relative intensities, frequencies relative to the anchor.</summary>
    public required IReadOnlyList<UnfoldedLine> Lines { get; init; }
    /// <summary>Each sweep's fit: origin, gain, background, χ².</summary>
    public required IReadOnlyList<SweepFit> Sweeps { get; init; }
    /// <summary>The joint NNLS solve and its diagnostics.</summary>
    public required NnlsResult Solver { get; init; }

    /// <summary>L1 weight used, in whitened units.</summary>
    public double L1Weight { get; init; }

    /// <summary>True when at least two instruments of different FSR were combined.</summary>
    public bool OrdersResolved { get; init; }

    /// <summary>Smallest shift at which the instruments' alias margin falls below the threshold (Hz).</summary>
    public double UnambiguousRangeHz { get; init; }

    /// <summary>Offset candidates tried and their χ² (for the report).</summary>
    public IReadOnlyList<OffsetTrial> OffsetTrials { get; init; } = [];

    /// <summary>What a user must know about this result (doubts, fallbacks, limits reached).</summary>
    public IReadOnlyList<string> Warnings { get; init; } = [];

    /// <summary>Smallest relative intensity that would have been detected at each grid bin, when computed.</summary>
    public double[]? DetectionLimit { get; init; }

    /// <summary>True when the lines were refined off-grid against the raw sweeps.</summary>
    public bool Refined { get; init; }

    /// <summary>The order verdict the outputs give a line of this result: unknown with one instrument; unchecked when the
    /// orders are resolved but no alternative placement was tried for it (no refinement, or the refinement's order check
    /// stopped before it: its own verdict is then unknown); else the line's own (secure or doubtful).</summary>
    public Analysis.OrderVerdict OrderVerdictOf(UnfoldedLine line) =>
        !OrdersResolved ? Analysis.OrderVerdict.Unknown
        : !Refined || line.Verdict is Analysis.OrderVerdict.Unknown or Analysis.OrderVerdict.Unchecked ? Analysis.OrderVerdict.Unchecked
        : line.Verdict;

    /// <summary>Reduced χ² over all sweeps.</summary>
    public double ReducedChiSquare { get; init; }
}

/// <summary>One candidate frequency origin for a sweep and the χ² it gave.</summary>
public sealed record OffsetTrial(string Sweep, double OffsetHz, double ChiSquare, bool Chosen);
