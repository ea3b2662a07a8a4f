using BenchmarkDotNet.Attributes;
using OrderUnfold.Inversion;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// Cost of one normal-equation product G x = Aᵀ(A x) (what the NNLS solver needs per iteration) and of one explicit
/// forward model plus adjoint, for two sweeps (one per cavity) against grid size and sweep length.
/// G x never touches the samples (SᵀS is a precomputed cyclic tridiagonal matrix on the periodic grid), so it should
/// grow with the grid only; forward + adjoint visits every sample and should grow with both.
/// </summary>
[Config(typeof(QuickConfig))]
public class OperatorBenchmarks
{
    private UnfoldProblem _problem = null!;
    private SweepOperator[] _ops = null!;
    private double[] _x = null!;
    private double[] _gx = null!;
    private double[] _adjoint = null!;

    [Params(2_500, 5_000, 10_000, 20_000)]
    public int Bins { get; set; }

    [Params(5_000, 20_000, 80_000)]
    public int SamplesPerSweep { get; set; }

    [GlobalSetup]
    public void Setup()
    {
        var c = SimulatedCase.TwoCavities(SamplesPerSweep);
        var grid = c.Grid(Bins);
        var step = c.PeriodicStepHz(grid);
        _problem = new UnfoldProblem(c.Sweeps, grid, c.OffsetsHz, c.Gains, 1.0, 0, step);
        _ops = c.Sweeps.Select((s, k) => new SweepOperator(s.Instrument, s.ScanHz, grid, c.OffsetsHz[k], step)).ToArray();
        // a solver-like iterate: 40 nonzero bins (a sparse line spectrum) and the two backgrounds
        var rng = new Random(1);
        _x = new double[_problem.Count];
        for (var i = 0; i < 40; i++) _x[rng.Next(Bins)] = rng.NextDouble();
        _x[Bins] = 0.1;
        _x[Bins + 1] = 0.2;
        _gx = new double[_problem.Count];
        _adjoint = new double[Bins];
    }

    /// <summary>One G x of the joint problem (both sweeps).</summary>
    [Benchmark]
    public double NormalProduct()
    {
        _problem.Multiply(_x, _gx);
        return _gx[0];
    }

    /// <summary>A x then Aᵀ r for both sweeps, sample by sample.</summary>
    [Benchmark]
    public double ForwardThenAdjoint()
    {
        Array.Clear(_adjoint);
        foreach (var op in _ops)
        {
            var y = op.Forward(_x.AsSpan(0, Bins));
            op.AdjointAdd(y, _adjoint);
        }

        return _adjoint[0];
    }
}
