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
    /// <summary>The setup that was run.</summary>
    public required Setup Setup { get; init; }

    /// <summary>The files read (setup, calibration sweeps, source sweeps, ramps), each once.</summary>
    public required IReadOnlyList<InputFile> Inputs { get; init; }

    /// <summary>Instruments as settled (finesse and FSR as the calibration evidence and the FSR refinement decided them,
    /// transverse families as fitted; see <see cref="InstrumentSettlement"/>).</summary>
    public required IReadOnlyList<Instrument> Instruments { get; init; }

    /// <summary>The axes, at the settled FSRs.</summary>
    public required IReadOnlyList<AxisCalibration> Calibrations { get; init; }

    /// <summary>The sweeps as unfolded (built at the decided FSRs when the FSRs were decided from the lines).</summary>
    public required IReadOnlyList<CalibratedSweep> Sweeps { get; init; }

    /// <summary>Raw sweeps in the same order as <see cref="Sweeps"/> (scan coordinate for plots and reports).</summary>
    public required IReadOnlyList<Sweep> RawSweeps { get; init; }

    /// <summary>The final result (lines, spectrum, sweep fits, warnings of the solve).</summary>
    public required UnfoldResult Result { get; init; }

    /// <summary>Diagnostics of the off-grid line refinement, when it ran.</summary>
    public Analysis.RefinementDiagnostics? Refinement { get; init; }

    /// <summary>The FSR decision from the lines (Vernier ratio, known interval), when it ran.</summary>
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
