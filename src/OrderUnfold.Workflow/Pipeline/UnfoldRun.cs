using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline;

/// <summary>An input file as it was when read: path, size and SHA-256 content hash.</summary>
public sealed record InputFile(string Role, string Path, long Bytes, string Sha256);

/// <summary>Everything one unfold run used and produced (inputs, calibrations, sweeps, result).</summary>
public sealed record UnfoldRun
{
    public required Setup Setup { get; init; }
    public required IReadOnlyList<InputFile> Inputs { get; init; }

    /// <summary>Instruments as used (finesse possibly measured by the calibration).</summary>
    public required IReadOnlyList<Instrument> Instruments { get; init; }

    public required IReadOnlyList<AxisCalibration> Calibrations { get; init; }
    public required IReadOnlyList<CalibratedSweep> Sweeps { get; init; }

    /// <summary>Raw sweeps in the same order as <see cref="Sweeps"/> (scan coordinate for plots and reports).</summary>
    public required IReadOnlyList<Sweep> RawSweeps { get; init; }

    public required UnfoldResult Result { get; init; }

    /// <summary>Diagnostics of the off-grid line refinement, when it ran.</summary>
    public Analysis.RefinementDiagnostics? Refinement { get; init; }

    /// <summary>FSR refinement (Vernier ratio, known interval), when it ran.</summary>
    public FsrRefinement? FsrRefinement { get; init; }

    /// <summary>Warnings from reading and calibrating (the result's own warnings are in <see cref="Result"/>).</summary>
    public IReadOnlyList<string> Warnings { get; init; } = [];

    /// <summary>The window check: set when the source looked wider than the first window and the window was widened.</summary>
    public WindowFinding? Window { get; init; }

    /// <summary>What the run did that a careful user may want to know but that needs no action (report.json "notes").</summary>
    public IReadOnlyList<string> Notes { get; init; } = [];

    /// <summary>All warnings, reading and calibration first.</summary>
    public IEnumerable<string> AllWarnings => Warnings.Concat(Result.Warnings);
}
