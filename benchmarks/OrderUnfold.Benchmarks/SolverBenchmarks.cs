using BenchmarkDotNet.Attributes;
using OrderUnfold.Inversion;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// The target case: two sweeps of 20 000 samples (one per cavity) on a 10 000-bin grid.
/// <see cref="NnlsKnownOffsets"/> is one L1-weighted NNLS solve at the true offsets and gains (problem set-up,
/// including the L1-weight probe, plus the Lawson–Hanson solve); <see cref="UnfolderRun"/> is the whole
/// <see cref="Unfolder.Run"/> (offset search, joint solve with gain/offset refits, line extraction) on the same data.
/// </summary>
[Config(typeof(QuickConfig))]
public class SolverBenchmarks
{
    private SimulatedCase _case = null!;
    private FrequencyGrid _grid = null!;
    private UnfoldProblem _problem = null!;
    private ActiveSetNnls.Options _options = null!;

    [Params(20_000)]
    public int SamplesPerSweep { get; set; }

    [Params(10_000)]
    public int Bins { get; set; }

    [GlobalSetup]
    public void Setup()
    {
        _case = SimulatedCase.TwoCavities(SamplesPerSweep);
        _grid = _case.Grid(Bins);
        var lambda = _case.L1Weight(_grid);
        _problem = new UnfoldProblem(_case.Sweeps, _grid, _case.OffsetsHz, _case.Gains, lambda, 0, _case.PeriodicStepHz(_grid));
        _options = new ActiveSetNnls.Options { Tolerance = 1e-3 * lambda, MaxIterations = Math.Max(2000, Bins) };
    }

    /// <summary>Set-up of the weighted problem (probe for the L1 weight, then the problem itself) and one NNLS solve.</summary>
    [Benchmark]
    public int NnlsKnownOffsets()
    {
        var lambda = _case.L1Weight(_grid);
        var problem = new UnfoldProblem(_case.Sweeps, _grid, _case.OffsetsHz, _case.Gains, lambda, 0, _case.PeriodicStepHz(_grid));
        return ActiveSetNnls.Solve(problem, _options).ActiveCount;
    }

    /// <summary>The Lawson–Hanson solve alone, on a problem built beforehand.</summary>
    [Benchmark]
    public int NnlsSolveOnly() => ActiveSetNnls.Solve(_problem, _options).ActiveCount;

    /// <summary>Everything <see cref="Unfolder.Run"/> does, with the window fixed to the same 10 000-bin grid.</summary>
    [Benchmark]
    public int UnfolderRun()
    {
        var options = new UnfoldOptions { WindowStartHz = _grid.StartHz, WindowEndHz = _grid.EndHz };
        return Unfolder.Run(_case.Sweeps, options).Lines.Count;
    }
}
