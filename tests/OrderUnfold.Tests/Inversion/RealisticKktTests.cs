using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Inversion;

/// <summary>
/// NNLS on a realistic two-cavity case (simulated data: two planar cavities of 100.0 mm and 93.7 mm, finesse 150,
/// six lines, 8-bit digitiser, Gaussian noise) at the true offsets, gains and scan axes, with the unfolder's L1
/// weight. The KKT conditions are checked with a gradient built independently from the sweep operators.
/// </summary>
public class RealisticKktTests(ITestOutputHelper output)
{
    internal sealed record Case(List<CalibratedSweep> Sweeps, double[] Offsets, double[] Gains, FrequencyGrid Grid, SimulationSpec Spec);

    internal static Case TwoCavityCase(int samples = 6000, double spanFsr = 4)
    {
        var spec = Scenarios.Demo() with
        {
            Cavities = Scenarios.Demo().Cavities.Select(c => c with { SpanFsr = spanFsr, Samples = samples }).ToList(),
            Seed = 31,
        };
        var rng = new Random(spec.Seed);
        var sweeps = new List<CalibratedSweep>();
        var offsets = new List<double>();
        var gains = new List<double>();
        foreach (var cav in spec.Cavities)
        {
            var trace = Simulator.Trace(spec, cav, false, rng);
            foreach (var half in SimulatedSweeps.Halves(trace, cav.Instrument.Name))
            {
                var scan = trace.TrueScanHz[half.FirstSample..(half.FirstSample + half.Count)];
                sweeps.Add(new CalibratedSweep(half.Name, cav.Instrument, scan, half.Y, NoiseEstimator.FirstDifferenceSigma(half.Y)));
                offsets.Add(trace.OffsetHz); // y = Σ I·T(ν − offset − f(x)): the simulator's offset is the origin φ
                gains.Add(cav.Gain);
            }
        }

        var lw = spec.Cavities.Min(c => c.Instrument.LinewidthHz);
        var grid = FrequencyGrid.Covering(-4e9, 11e9, lw / 4);
        return new Case(sweeps, offsets.ToArray(), gains.ToArray(), grid, spec);
    }

    /// <summary>L1 weight as the unfolder sets it: sparsity × √(median squared column norm).</summary>
    internal static double L1Weight(Case c, double periodicStep, double sparsity = 3)
    {
        var probe = new UnfoldProblem(c.Sweeps, c.Grid, c.Offsets, c.Gains, 0, 0, periodicStep);
        var norms = Enumerable.Range(0, 33).Select(i => probe.ColumnNormSquared(i * (c.Grid.Count - 1) / 32)).OrderBy(v => v).ToList();
        return sparsity * Math.Sqrt(norms[norms.Count / 2]);
    }

    [Fact]
    public void KktConditionsHoldAndLinesComeBack()
    {
        var c = TwoCavityCase();
        var lw = c.Sweeps.Min(s => s.Instrument.LinewidthHz);
        var periodicStep = Math.Min(c.Grid.StepHz / 2, lw / 20);
        var lambda = L1Weight(c, periodicStep);
        var problem = new UnfoldProblem(c.Sweeps, c.Grid, c.Offsets, c.Gains, lambda, 0, periodicStep);
        var tol = 1e-3 * lambda; // the unfolder's solver tolerance
        var result = ActiveSetNnls.Solve(problem, new ActiveSetNnls.Options { Tolerance = tol, MaxIterations = 5000 });
        output.WriteLine($"{c.Grid.Count} bins, λ = {lambda:G4}, {result.Iterations} iterations, {result.Removals} removals, active {result.ActiveCount}, status {result.Status}, KKT {result.KktViolation:G3}");
        Assert.Equal(SolverStatus.Converged, result.Status);

        // gradient of −(½‖y_w − B x‖² + λ Σ s) built from Forward/AdjointAdd, not from UnfoldProblem.Multiply
        var n = c.Grid.Count;
        var x = result.Solution;
        var grad = new double[x.Length];
        for (var k = 0; k < c.Sweeps.Count; k++)
        {
            var sw = c.Sweeps[k];
            var op = new SweepOperator(sw.Instrument, sw.ScanHz, c.Grid, c.Offsets[k], periodicStep);
            var scale = c.Gains[k] / sw.NoiseSigma;
            var model = op.Forward(x.AsSpan(0, n));
            var residual = new double[model.Length];
            for (var i = 0; i < model.Length; i++) residual[i] = sw.Signal[i] / sw.NoiseSigma - (scale * model[i] + x[n + k]);
            op.AdjointAdd(residual, grad.AsSpan(0, n), scale);
            grad[n + k] = residual.Sum();
        }

        for (var j = 0; j < n; j++) grad[j] -= lambda;
        var worstZero = double.NegativeInfinity;
        var worstActive = 0.0;
        for (var j = 0; j < x.Length; j++)
        {
            var free = j >= n;
            if (!free) Assert.True(x[j] >= 0, $"x[{j}] = {x[j]} < 0");
            if (free || x[j] > 0) worstActive = Math.Max(worstActive, Math.Abs(grad[j]));
            else worstZero = Math.Max(worstZero, grad[j]);
        }

        output.WriteLine($"largest gradient where x = 0: {worstZero:G3}; largest |gradient| where x > 0 or free: {worstActive:G3} (λ = {lambda:G3})");
        // where x = 0 the gradient may not exceed the solver's tolerance (1e-3 λ) by more than rounding;
        // where x > 0 (and for the free backgrounds) it must vanish to rounding of the normal equations
        Assert.True(worstZero <= 1.01 * tol, $"gradient {worstZero:G3} > tolerance {tol:G3} at a zero entry");
        Assert.True(worstActive <= 1e-6 * lambda, $"|gradient| {worstActive:G3} at an active entry");

        // sanity: each simulated line carries its intensity (± 10 %) within ±3 linewidths of its frequency
        foreach (var line in c.Spec.Lines)
        {
            var mass = 0.0;
            for (var j = 0; j < n; j++)
                if (Math.Abs(c.Grid[j] - line.FrequencyHz) <= 3 * lw) mass += x[j];
            Assert.InRange(mass, 0.9 * line.Intensity, 1.1 * line.Intensity);
        }
    }

    /// <summary>The rows of G x that the solver's working set asks for equal the whole product's (same sums, same order),
    /// with and without the smoothness weight, for a sparse x with backgrounds.</summary>
    [Theory]
    [InlineData(0.0)]
    [InlineData(5.0)]
    public void RowsOfTheProductEqualTheWholeProduct(double smoothness)
    {
        var c = TwoCavityCase();
        var lw = c.Sweeps.Min(s => s.Instrument.LinewidthHz);
        var periodicStep = Math.Min(c.Grid.StepHz / 2, lw / 20);
        var problem = new UnfoldProblem(c.Sweeps, c.Grid, c.Offsets, c.Gains, L1Weight(c, periodicStep), smoothness, periodicStep);
        var n = c.Grid.Count;
        var rng = new Random(5);
        var x = new double[problem.Count];
        var support = new List<int>();
        for (var q = 0; q < 40; q++)
        {
            var j = rng.Next(n);
            x[j] = rng.NextDouble();
            support.Add(j);
        }

        for (var k = 0; k < c.Sweeps.Count; k++)
        {
            x[n + k] = rng.NextDouble() - 0.5;
            support.Add(n + k);
        }

        var whole = new double[problem.Count];
        problem.Multiply(x, whole);
        var rows = Enumerable.Range(0, 500).Select(_ => rng.Next(problem.Count)).Concat(support).Concat([0, n - 1]).ToList();
        var part = new double[rows.Count];
        problem.MultiplyRows(x, support, rows, part);
        for (var r = 0; r < rows.Count; r++) Assert.Equal(whole[rows[r]], part[r]);
    }

    /// <summary>The solve with the working set (forced on at this size) and the one with a whole pass every iteration
    /// both satisfy the KKT conditions and reach the same objective within the bound that follows from convexity: for
    /// KKT violations ε₁, ε₂ the objectives differ by at most max(ε₁, ε₂)·(‖x₁‖₁ + ‖x₂‖₁).</summary>
    [Fact]
    public void WorkingSetReachesTheSameOptimum()
    {
        var c = TwoCavityCase();
        var lw = c.Sweeps.Min(s => s.Instrument.LinewidthHz);
        var periodicStep = Math.Min(c.Grid.StepHz / 2, lw / 20);
        var lambda = L1Weight(c, periodicStep);
        var problem = new UnfoldProblem(c.Sweeps, c.Grid, c.Offsets, c.Gains, lambda, 0, periodicStep);
        var options = new ActiveSetNnls.Options { Tolerance = 1e-3 * lambda, MaxIterations = 5000 };
        var classic = ActiveSetNnls.Solve(problem, options with { WorkingSetFraction = 0 });
        var working = ActiveSetNnls.Solve(problem, options with { WorkingSetMinEntries = 0 });
        output.WriteLine($"whole passes: {classic.Iterations} iterations, active {classic.ActiveCount}, KKT {classic.KktViolation:G3}; " +
                         $"working set: {working.Iterations} iterations, active {working.ActiveCount}, KKT {working.KktViolation:G3}");
        Assert.Equal(SolverStatus.Converged, classic.Status);
        Assert.Equal(SolverStatus.Converged, working.Status);
        Assert.True(working.KktViolation <= options.Tolerance, $"KKT violation {working.KktViolation:G3}");

        double Objective(double[] x) => NnlsResult.ObjectiveOf(problem, x);

        var f1 = Objective(classic.Solution);
        var f2 = Objective(working.Solution);
        var bound = Math.Max(classic.KktViolation, working.KktViolation) * (classic.Solution.Sum(Math.Abs) + working.Solution.Sum(Math.Abs));
        output.WriteLine($"objectives {f1:R} and {f2:R}, difference {Math.Abs(f1 - f2):G3}, bound {bound:G3}");
        Assert.True(Math.Abs(f1 - f2) <= bound + 1e-12 * Math.Abs(f1), $"objectives {f1:R} and {f2:R} differ by more than {bound:G3}");
    }
}
