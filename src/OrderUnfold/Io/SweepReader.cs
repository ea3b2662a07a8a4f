namespace OrderUnfold.Io;

/// <summary>Reads oscilloscope/DAQ delimited-text exports into traces and splits triangle ramps.</summary>
public static class SweepReader
{
    /// <summary>Reads a trace. Throws <see cref="InputException"/> with file, line and column on bad input.</summary>
    public static RawTrace Read(SweepFileOptions options) => throw new NotImplementedException("SweepReader.Read");

    /// <summary>Splits a trace into single-direction sweeps (one sweep when there is no triangle ramp).</summary>
    public static IReadOnlyList<Sweep> Split(RawTrace trace, DirectionChoice directions = DirectionChoice.Both) =>
        throw new NotImplementedException("SweepReader.Split");

    /// <summary>Read and split in one call.</summary>
    public static IReadOnlyList<Sweep> ReadSweeps(SweepFileOptions options) => Split(Read(options), options.Directions);
}
