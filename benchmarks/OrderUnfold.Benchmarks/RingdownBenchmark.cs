using BenchmarkDotNet.Attributes;
using OrderUnfold.Calibration;
using OrderUnfold.Io;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// Cost of the ring-down stage (<see cref="RingdownHandling.PrepareAll"/>) on the field traces: 01 (62 500 samples at 2 ns,
/// every peak rings: check, fit of every peak, corrected signal) and the calibration sweep of 07 (20 000 samples, slow sweep:
/// the check alone). The traces are read from &lt;repo root&gt;/../shared/field-traces in the setup, not timed. Run with
/// <c>dotnet run -c Release --project benchmarks/OrderUnfold.Benchmarks -- --filter '*RingdownBenchmark*'</c>.
/// </summary>
[Config(typeof(QuickConfig))]
public class RingdownBenchmark
{
    private IReadOnlyList<Sweep> _ringing = null!;
    private IReadOnlyList<Sweep> _slow = null!;

    [GlobalSetup]
    public void Setup()
    {
        var dir = new DirectoryInfo(AppContext.BaseDirectory);
        while (dir is not null && !File.Exists(Path.Combine(dir.FullName, "OrderUnfold.sln"))) dir = dir.Parent;
        var traces = Path.GetFullPath(Path.Combine(dir?.FullName ?? ".", "..", "shared", "field-traces"));
        // as the user's setup states them: ramp channel as scan coordinate
        _ringing = SweepReader.ReadSweeps(new SweepFileOptions
        {
            Path = Path.Combine(traces, "01_ringdown_confocal", "ringdown_780nm.csv"), XColumn = "ramp", YColumn = "pd", Scan = ScanCoordinate.Ramp,
        });
        _slow = SweepReader.ReadSweeps(new SweepFileOptions
        {
            Path = Path.Combine(traces, "07_two_cavity_multiline", "cavA_cal.csv"), XColumn = "3", YColumn = "2", Scan = ScanCoordinate.Ramp,
        });
    }

    /// <summary>Trace 01, all six ramp halves (62 327 samples): ring-down found, every peak fitted, signals corrected.</summary>
    [Benchmark]
    public int RingingTrace() => RingdownHandling.PrepareAll(_ringing).Sum(p => p.Peaks.Count);

    /// <summary>Trace 07 calibration sweep (20 000 samples): the check finds no ring-down.</summary>
    [Benchmark]
    public int SlowTrace() => RingdownHandling.PrepareAll(_slow).Count(p => p.Evidence.Detected);
}
