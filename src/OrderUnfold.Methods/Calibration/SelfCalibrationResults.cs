namespace OrderUnfold.Calibration;

/// <summary>Options of <see cref="SelfCalibrator"/>.</summary>
public sealed record SelfCalibrationOptions
{
    /// <summary>Polynomial degree of the axis; null chooses it by leave-one-out cross-validation over the pairs.</summary>
    public int? Degree { get; init; }

    /// <summary>Largest degree tried when the degree is chosen from the data.</summary>
    public int MaxDegree { get; init; } = AxisCalibrator.MaxAutoDegree;

    /// <summary>Peaks lower than this fraction of the tallest are not used.</summary>
    public double MinHeightFraction { get; init; } = 0.04;

    /// <summary>Peaks below this height-to-noise ratio are not used.</summary>
    public double MinSnr { get; init; } = 6;

    /// <summary>Final half-width of the pairing window, in peak widths (FWHM), before the axis uncertainty is added.</summary>
    public double PairWindowWidths { get; init; } = 0.4;

    /// <summary>Largest ratio of the heights (and of the widths) of two peaks that may be the same feature one FSR apart.</summary>
    public double ShapeRatioTolerance { get; init; } = 1.7;

    /// <summary>Rounds of pairing and fitting.</summary>
    public int MaxIterations { get; init; } = 10;

    /// <summary>Pairs whose residual exceeds this many robust standard deviations are rejected.</summary>
    public double RejectSigma { get; init; } = 3;

    /// <summary>Starting axis (e.g. from a calibration sweep of the same ramp direction); null estimates it from
    /// the sweep's own local autocorrelation.</summary>
    public AxisPolynomial? InitialAxis { get; init; }

    /// <summary>A calibration-sweep axis of the same instrument and ramp direction whose points are fitted jointly.</summary>
    public AxisCalibration? Companion { get; init; }

    /// <summary>Frequency interval after which every feature repeats, Hz; null: the instrument's FSR. For a
    /// calibration laser of another wavelength this is FSR·λ_cal/λ_source (in source frequency units).</summary>
    public double? PeriodHz { get; init; }

    /// <summary>Fit the effective finesse from isolated peaks (costs a few small fits).</summary>
    public bool FitFinesse { get; init; } = true;

    /// <summary>When the peaks show transverse families on a Gouy ladder (a family N ≥ 2 besides N = 1), refit the axis to every
    /// peak of the line and its families at once (<see cref="SelfCalibrator"/>, the ladder refit); false keeps the repeat pairs alone.</summary>
    public bool UseFamilyLadder { get; init; } = true;
}

/// <summary>Two peaks taken to be one feature one period apart: f(RepeatX) − f(FirstX) = DeltaHz.</summary>
/// <param name="FirstX">Scan coordinate of the first peak (the smaller x).</param>
/// <param name="RepeatX">Scan coordinate of its repeat.</param>
/// <param name="HeightA">Height of the first peak.</param>
/// <param name="HeightB">Height of the repeat.</param>
/// <param name="DeltaHz">Frequency difference the pair states (±period, sign by the sweep convention).</param>
/// <param name="SigmaHz">Standard uncertainty assigned to the constraint.</param>
/// <param name="Origin">"repeat" (from the sweep itself) or "calibration" (from a calibration sweep).</param>
/// <param name="ResidualHz">DeltaHz − (f(RepeatX) − f(FirstX)) for the final axis.</param>
/// <param name="Used">False when rejected as an outlier.</param>
public sealed record RepeatPair(double FirstX, double RepeatX, double HeightA, double HeightB, double DeltaHz, double SigmaHz, string Origin,
    double ResidualHz, bool Used);

/// <summary>How one polynomial degree scored.</summary>
/// <param name="Degree">Degree.</param>
/// <param name="ChiSquare">Weighted residual sum of squares.</param>
/// <param name="Bic">Bayesian information criterion n·ln(χ²/n) + d·ln n (lower is better), for reference.</param>
/// <param name="LeaveOneOut">Leave-one-out prediction error Σ (rᵢ/(1 − hᵢᵢ))² of the whitened constraints (PRESS), which chooses the degree.</param>
/// <param name="Monotone">Whether the axis is monotone over the calibrated range.</param>
public sealed record DegreeScore(int Degree, double ChiSquare, double Bic, double LeaveOneOut, bool Monotone);

/// <summary>What <see cref="SelfCalibrator.Calibrate"/> found.</summary>
/// <param name="Calibration">The axis, ready for the pipeline (method, residuals, finesse, warnings).</param>
/// <param name="Pairs">Every pair considered in the last round, used or rejected.</param>
/// <param name="Peaks">The peaks found in the sweep.</param>
/// <param name="Degrees">Score of each degree tried in the last round.</param>
/// <param name="AxisSigmaHz">RMS standard uncertainty of the axis over the calibrated range (constant removed), Hz.</param>
/// <param name="Iterations">Pairing rounds used.</param>
/// <param name="InitialPeriodSamples">Samples per period at the sweep centre according to the starting axis.</param>
/// <param name="Candidates">Every starting period tried and how its pairs scored.</param>
public sealed record SelfCalibrationResult(AxisCalibration Calibration, IReadOnlyList<RepeatPair> Pairs, IReadOnlyList<Peak> Peaks,
    IReadOnlyList<DegreeScore> Degrees, double AxisSigmaHz, int Iterations, double InitialPeriodSamples, IReadOnlyList<PeriodCandidate> Candidates);

/// <summary>One starting period tried by the self-calibration.</summary>
/// <param name="PeriodSamples">Samples per period at the sweep centre on the axis this start converged to (NaN when it found no pairs).</param>
/// <param name="Pairs">Repeat pairs used.</param>
/// <param name="Coverage">Height-weighted share of the peaks that could have a repeat inside the sweep and have one.</param>
/// <param name="HeightMismatch">Median of |ln(h_b/h_a)| about its trend along the sweep, in units of its noise (about 0.7 for true repeats).</param>
/// <param name="Chosen">Whether this start gave the axis.</param>
public sealed record PeriodCandidate(double PeriodSamples, int Pairs, double Coverage, double HeightMismatch, bool Chosen);
