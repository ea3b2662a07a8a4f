namespace OrderUnfold.Calibration;

/// <summary>Options of <see cref="FsrRefiner"/>.</summary>
public sealed record FsrRefineOptions
{
    /// <summary>Refine the FSR ratios between instruments from the Vernier pattern.</summary>
    public bool RefineRatio { get; init; } = true;

    /// <summary>A frequency interval known to separate lines (RF sidebands of a phase modulator at this frequency,
    /// a known splitting), Hz; it calibrates the absolute FSR scale. Null: the stated FSR of the reference stays.</summary>
    public double? KnownIntervalHz { get; init; }

    /// <summary>Instrument whose stated FSR fixes the scale when no interval is known (null: the first).</summary>
    public string? ReferenceInstrument { get; init; }

    /// <summary>Line pairs whose separation is within this fraction (plus two linewidths) of a multiple of the known
    /// interval are taken to be separated by it.</summary>
    public double IntervalTolerance { get; init; } = 0.015;

    /// <summary>Largest multiple of the known interval looked for (2: first-order sidebands on both sides).</summary>
    public int MaxIntervalMultiple { get; init; } = 2;

    /// <summary>Most refine-and-unfold rounds.</summary>
    public int MaxRounds { get; init; } = 3;

    /// <summary>Lines below this signal-to-noise ratio do not take part.</summary>
    public double MinSnr { get; init; } = 8;

    /// <summary>Most lines used (the strongest).</summary>
    public int MaxLines { get; init; } = 14;

    /// <summary>Largest relative FSR error the pre-scan of folded peaks looks for (default 2.5 %).</summary>
    public double MaxScaleError { get; init; } = 0.025;

    /// <summary>CPU seconds (of the calling thread) that the per-instrument line fits of all rounds may use together;
    /// when used up the rounds stop with a warning and the FSRs stay as far as the finished rounds took them.</summary>
    public double CpuBudgetSeconds { get; init; } = 5;
}

/// <summary>The refined FSR of one instrument.</summary>
/// <param name="Instrument">Instrument name.</param>
/// <param name="NominalFsrHz">FSR before refinement (as stated or calibrated).</param>
/// <param name="RefinedFsrHz">FSR after refinement.</param>
/// <param name="SigmaHz">Standard uncertainty of the refined FSR (of the ratio only, when no interval is known).</param>
/// <param name="RelativeChange">RefinedFsrHz / NominalFsrHz − 1.</param>
/// <param name="Basis">What fixed it ("reference", "Vernier ratio", "known interval", …).</param>
public sealed record InstrumentScale(string Instrument, double NominalFsrHz, double RefinedFsrHz, double SigmaHz, double RelativeChange, string Basis);

/// <summary>A pair of lines taken to be a known interval (or a multiple of it) apart.</summary>
/// <param name="LowerHz">Lower line after refinement, relative to the anchor.</param>
/// <param name="UpperHz">Upper line after refinement.</param>
/// <param name="Multiple">How many intervals separate them.</param>
/// <param name="StatedHz">Multiple × the stated interval.</param>
/// <param name="MeasuredHz">Separation in the refined result.</param>
/// <param name="SigmaHz">Standard uncertainty of the measured separation before refinement (from the line fits).</param>
public sealed record IntervalMatch(double LowerHz, double UpperHz, int Multiple, double StatedHz, double MeasuredHz, double SigmaHz);

/// <summary>How one line moved because of the refinement.</summary>
public sealed record LineShift(double BeforeHz, double AfterHz)
{
    /// <summary>AfterHz − BeforeHz.</summary>
    public double ShiftHz => AfterHz - BeforeHz;
}

/// <summary>What the FSR decision from the lines (<see cref="FsrRefiner.Decide"/>) decided, and how the search got there.</summary>
/// <param name="Instruments">Decided FSR per instrument, with its basis and uncertainty.</param>
/// <param name="Intervals">Line pairs matched to the known interval.</param>
/// <param name="Rounds">Refine-and-unfold rounds of the search run.</param>
/// <param name="ReducedChiSquareBefore">Reduced χ² of the search's first trial unfold (at the pre-scanned FSRs).</param>
/// <param name="ReducedChiSquareAfter">Reduced χ² of its last trial unfold.</param>
/// <param name="LineShifts">Each line of the last trial unfold, with where it would sit on the reference's settled FSR scale.</param>
/// <param name="Warnings">What looked wrong.</param>
/// <param name="Notes">What was done, in plain words.</param>
public sealed record FsrRefinement(IReadOnlyList<InstrumentScale> Instruments, IReadOnlyList<IntervalMatch> Intervals, int Rounds,
    double ReducedChiSquareBefore, double ReducedChiSquareAfter, IReadOnlyList<LineShift> LineShifts, IReadOnlyList<string> Warnings, IReadOnlyList<string> Notes)
{
    /// <summary>Largest line shift caused by the refinement, Hz.</summary>
    public double MaxLineShiftHz => LineShifts.Count == 0 ? 0 : LineShifts.Max(s => Math.Abs(s.ShiftHz));
}

/// <summary>One instrument's view of the lines: positions fitted to its sweeps alone.</summary>
/// <param name="Instrument">Instrument name.</param>
/// <param name="FrequencyHz">Line positions relative to the anchor line, in this instrument's frequency scale.</param>
/// <param name="Covariance">Covariance of those positions, Hz² (the anchor is fixed, so its row is zero).</param>
/// <param name="ReducedChiSquare">Fit quality.</param>
public sealed record InstrumentLineFit(string Instrument, double[] FrequencyHz, double[,] Covariance, double ReducedChiSquare);
