using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Pipeline;

public class DebugTests(ITestOutputHelper output)
{
    [Theory]
    [InlineData(true, false)]
    [InlineData(false, false)]
    public void Single(bool trueAxis, bool triangle)
    {
        var spec = new SimulationSpec
        {
            Lines = [new SimulatedLine(0, 1.0), new SimulatedLine(151e6, 0.55)],
            Cavities = [new SimulatedCavity { Instrument = Instrument.FromLength("short", 0.1, CavityGeometry.Planar, 150), Gain = 0.9 }],
            Seed = 7, Triangle = triangle,
        };
        var sw = System.Diagnostics.Stopwatch.StartNew();
        var sweeps = SimulatedSweeps.Calibrated(spec, trueAxis);
        var result = Unfolder.Run(sweeps);
        output.WriteLine($"elapsed {sw.ElapsedMilliseconds} ms");
        foreach (var l in result.Lines) output.WriteLine($"{l.FrequencyHz / 1e6,12:F2} MHz  {l.Intensity:F3}  snr {l.Snr:F0}");
        foreach (var s in result.Sweeps) output.WriteLine($"{s.Name}: chi2r {s.ReducedChiSquare:F2} gain {s.Gain:F3} sigma {s.NoiseSigma:G3}");
        output.WriteLine($"solver {result.Solver.Iterations} it, {result.Solver.Status}, active {result.Solver.ActiveCount}, removals {result.Solver.Removals}, kkt {result.Solver.KktViolation}");
        foreach (var w in result.Warnings) output.WriteLine(w);
    }
}
public class DebugTwo(ITestOutputHelper output)
{
    [Fact]
    public void Two()
    {
        const double Cs = 9_192_631_770;
        var spec = new SimulationSpec
        {
            Lines = [new SimulatedLine(0, 1.0), new SimulatedLine(151e6, 0.55), new SimulatedLine(Cs, 0.8), new SimulatedLine(Cs + 237e6, 0.45), new SimulatedLine(Cs - 263e6, 0.3)],
            Cavities =
            [
                new SimulatedCavity { Instrument = Instrument.FromLength("short", 0.1, CavityGeometry.Planar, 150), Gain = 0.9 },
                new SimulatedCavity { Instrument = Instrument.FromLength("long", 0.0937, CavityGeometry.Planar, 150), Gain = 1.2, Quadratic = 0.04, Cubic = -0.02 },
            ],
            Seed = 7, Triangle = false,
        };
        var sweeps = SimulatedSweeps.Calibrated(spec, true);
        var sw = System.Diagnostics.Stopwatch.StartNew();
        var result = Unfolder.Run(sweeps, new UnfoldOptions { WindowStartHz = -12e9, WindowEndHz = 12e9 }, new Progress(output, sw));
        output.WriteLine($"elapsed {sw.ElapsedMilliseconds} ms, grid {result.Grid.Count}");
        foreach (var t in result.OffsetTrials) output.WriteLine($"trial {t.Sweep} {t.OffsetHz/1e6:F2} MHz chi2 {t.ChiSquare:F0} {t.Chosen}");
        foreach (var l in result.Lines) output.WriteLine($"{l.FrequencyHz / 1e6,12:F2} MHz  {l.Intensity:F3}  snr {l.Snr:F0}");
        foreach (var s in result.Sweeps) output.WriteLine($"{s.Name}: chi2r {s.ReducedChiSquare:F2} gain {s.Gain:F3} sigma {s.NoiseSigma:G3}");
        output.WriteLine($"solver {result.Solver.Iterations} it, {result.Solver.Status}, active {result.Solver.ActiveCount}, removals {result.Solver.Removals}, kkt {result.Solver.KktViolation}");
        foreach (var w in result.Warnings) output.WriteLine(w);
    }

    private sealed class Progress(ITestOutputHelper o, System.Diagnostics.Stopwatch sw) : IProgress<string>
    {
        public void Report(string value) => o.WriteLine($"{sw.ElapsedMilliseconds} ms: {value}");
    }
}
public class DebugProfile(ITestOutputHelper output)
{
    private sealed class Timed(INormalEquations inner) : INormalEquations
    {
        public System.Diagnostics.Stopwatch Mul = new(), Col = new();
        public int Muls, Cols;
        public int Count => inner.Count;
        public ReadOnlySpan<double> RightHandSide => inner.RightHandSide;
        public bool IsFree(int j) => inner.IsFree(j);
        public void Multiply(ReadOnlySpan<double> x, Span<double> result) { Mul.Start(); inner.Multiply(x, result); Mul.Stop(); Muls++; }
        public void Column(int j, IReadOnlyList<int> rows, Span<double> result, out double diagonal) { Col.Start(); inner.Column(j, rows, result, out diagonal); Col.Stop(); Cols++; }
    }

    [Fact]
    public void Profile()
    {
        const double Cs = 9_192_631_770;
        var spec = new SimulationSpec
        {
            Lines = [new SimulatedLine(0, 1.0), new SimulatedLine(151e6, 0.55), new SimulatedLine(Cs, 0.8), new SimulatedLine(Cs + 237e6, 0.45), new SimulatedLine(Cs - 263e6, 0.3)],
            Cavities =
            [
                new SimulatedCavity { Instrument = Instrument.FromLength("short", 0.1, CavityGeometry.Planar, 150), Gain = 0.9 },
                new SimulatedCavity { Instrument = Instrument.FromLength("long", 0.0937, CavityGeometry.Planar, 150), Gain = 1.2, Quadratic = 0.04, Cubic = -0.02 },
            ],
            Seed = 7, Triangle = false,
        };
        var sweeps = SimulatedSweeps.Calibrated(spec, true);
        var grid = FrequencyGrid.Covering(-12e9, 12e9, 2.5e6);
        foreach (var phi in new[] { 5911.40e6, 5908.70e6 })
        {
            var p = new UnfoldProblem(sweeps, grid, [0, phi], [1, 1.4], 0, 0, 0.5e6);
            var lam = 3 * Math.Sqrt(p.ColumnNormSquared(100));
            p = new UnfoldProblem(sweeps, grid, [0, phi], [1, 1.4], lam, 0, 0.5e6);
            var t = new Timed(p);
            var sw = System.Diagnostics.Stopwatch.StartNew();
            var r = ActiveSetNnls.Solve(t, new ActiveSetNnls.Options { Tolerance = 1e-3 * lam });
            output.WriteLine($"phi {phi/1e6}: total {sw.ElapsedMilliseconds} ms, mul {t.Mul.ElapsedMilliseconds} ms x{t.Muls}, col {t.Col.ElapsedMilliseconds} ms x{t.Cols}, it {r.Iterations}, removals {r.Removals}, active {r.ActiveCount}, {r.Status}");
        }
    }
}
