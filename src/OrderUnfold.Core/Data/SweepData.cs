namespace OrderUnfold.Data;

/// <summary>What the scan coordinate x of a sweep is.</summary>
public enum ScanCoordinate
{
    /// <summary>Time since the start of the record, s.</summary>
    Time,

    /// <summary>Recorded piezo ramp (monitor) voltage, V.</summary>
    Ramp,
}

/// <summary>Direction of the piezo ramp during a sweep segment.</summary>
public enum RampDirection
{
    /// <summary>Only one direction is known to be present (single ramp, or no ramp record).</summary>
    Single,

    /// <summary>The rising half of a triangle ramp.</summary>
    Up,

    /// <summary>The falling half of a triangle ramp.</summary>
    Down,
}

/// <summary>Which halves of a triangle-ramp trace to use.</summary>
public enum DirectionChoice
{
    /// <summary>Both halves, as separate sweeps.</summary>
    Both,

    /// <summary>Only the rising halves.</summary>
    Up,

    /// <summary>Only the falling halves.</summary>
    Down,
}

/// <summary>
/// How to read one delimited-text sweep file (oscilloscope or DAQ export). Everything that can be
/// detected is detected when left null: delimiter, decimal comma, header row, preamble lines.
/// </summary>
public sealed record SweepFileOptions
{
    /// <summary>Path of the file (absolute, or relative to the working directory).</summary>
    public required string Path { get; init; }

    /// <summary>Column holding the scan coordinate: a header name or a 1-based index ("1"). Null: the first column,
    /// unless <see cref="SampleIntervalS"/> is set, in which case x is rebuilt as time = index × interval.</summary>
    public string? XColumn { get; init; }

    /// <summary>Column holding the detector signal: header name or 1-based index. Null: the last column.</summary>
    public string? YColumn { get; init; }

    /// <summary>Optional column with the recorded ramp voltage, used to split triangle ramps when x is time.</summary>
    public string? RampColumn { get; init; }

    /// <summary>
    /// A second file holding the recorded ramp (scopes that save one channel per file), or null. The signal file's x
    /// column is then its time, and the ramp is matched to the signal samples by time (identical time stamps, or
    /// linear interpolation of the ramp onto the signal's times). Not together with <see cref="RampColumn"/>.
    /// </summary>
    public string? RampFile { get; init; }

    /// <summary>Time column of <see cref="RampFile"/>: header name or 1-based index. Null: the first column, unless the
    /// signal's time is rebuilt from <see cref="SampleIntervalS"/>, in which case the ramp's time is rebuilt the same way.</summary>
    public string? RampTimeColumn { get; init; }

    /// <summary>Ramp voltage column of <see cref="RampFile"/>: header name or 1-based index. Null: the last column.</summary>
    public string? RampValueColumn { get; init; }

    /// <summary>What x is: time or ramp voltage. Ramp implies the x column is also the ramp used for splitting.</summary>
    public ScanCoordinate Scan { get; init; } = ScanCoordinate.Time;

    /// <summary>Sample interval in s; when set and no x column is named, time is rebuilt from it.</summary>
    public double? SampleIntervalS { get; init; }

    /// <summary>Field delimiter (',', ';', '\t'); null detects it.</summary>
    public char? Delimiter { get; init; }

    /// <summary>True when numbers use a decimal comma ("1,25"); null detects it.</summary>
    public bool? DecimalComma { get; init; }

    /// <summary>True when the first data-like block starts with a header row; null detects it.</summary>
    public bool? HasHeader { get; init; }

    /// <summary>Which ramp directions to keep when the trace holds a triangle ramp.</summary>
    public DirectionChoice Directions { get; init; } = DirectionChoice.Both;
}

/// <summary>A trace as read from a file: all samples, in file order, with the source line of each sample.</summary>
public sealed record RawTrace
{
    /// <summary>Path of the file the trace was read from.</summary>
    public required string Source { get; init; }

    /// <summary>Scan coordinate of each sample (see <see cref="Scan"/>).</summary>
    public required double[] X { get; init; }

    /// <summary>Detector signal of each sample.</summary>
    public required double[] Y { get; init; }

    /// <summary>Recorded ramp voltage per sample, when the file has one (equals X when the scan coordinate is the ramp).</summary>
    public double[]? Ramp { get; init; }

    /// <summary>1-based line number in the file of each sample (for messages).</summary>
    public required int[] Lines { get; init; }

    /// <summary>The file the ramp came from when it is not <see cref="Source"/> (one channel per file), else null.</summary>
    public string? RampSource { get; init; }

    /// <summary>What <see cref="X"/> is: time or ramp voltage.</summary>
    public ScanCoordinate Scan { get; init; }

    /// <summary>Human label of x, e.g. "time (s)" or "ramp (V)".</summary>
    public string XLabel => Scan == ScanCoordinate.Time ? "time (s)" : "ramp (V)";
}

/// <summary>
/// One sweep ready for analysis: a segment of a trace over which the ramp moves in one direction,
/// with x strictly increasing or strictly decreasing as recorded.
/// </summary>
public sealed record Sweep
{
    /// <summary>Display name, e.g. "short_source.csv (up)".</summary>
    public required string Name { get; init; }

    /// <summary>Path of the file the sweep was read from.</summary>
    public required string Source { get; init; }

    /// <summary>Scan coordinate of each sample, monotonic within the segment (see <see cref="Scan"/>).</summary>
    public required double[] X { get; init; }

    /// <summary>Detector signal of each sample.</summary>
    public required double[] Y { get; init; }

    /// <summary>Which half of the ramp this segment is.</summary>
    public RampDirection Direction { get; init; } = RampDirection.Single;

    /// <summary>What <see cref="X"/> is: time or ramp voltage.</summary>
    public ScanCoordinate Scan { get; init; }

    /// <summary>Index of the first sample of this segment in the original trace.</summary>
    public int FirstSample { get; init; }

    /// <summary>
    /// The digitiser's quantisation step (LSB) of the signal, in signal units, when the values of the whole record sit
    /// on an evenly spaced grid (e.g. an 8-bit scope: every value is an offset plus a whole number of steps); null when
    /// they do not, or when there are too few distinct values to tell. A rounding error uniform over one step has
    /// variance LSB²/12. Detected by the sweep reader (Workflow: Io/Digitiser).
    /// </summary>
    public double? QuantisationStep { get; init; }

    /// <summary>
    /// Indices (into <see cref="X"/> and <see cref="Y"/>, ascending) of samples that sit in a run at the record's
    /// full-scale value (its highest or lowest value) longer than noise or the peak's shape allows: the digitiser
    /// clipped them, so they only bound the true signal. Empty when none. Detected by the sweep reader (Workflow: Io/Digitiser).
    /// </summary>
    public int[] ClippedSamples { get; init; } = [];

    /// <summary>Number of samples.</summary>
    public int Count => X.Length;
}
