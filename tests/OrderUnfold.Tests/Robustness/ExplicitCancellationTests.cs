using OrderUnfold.Analysis;
using OrderUnfold.Benchmarks;
using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Numerics;
using OrderUnfold.Pipeline;
using OrderUnfold.Planning;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Analysis;
using OrderUnfold.Tests.Simulation;
using Xunit;

namespace OrderUnfold.Tests.Robustness;

/// <summary>The demo scenario's sweeps (SIMULATED) on their true scan axes and their grid unfold, shared by the tests.</summary>
public sealed class CancellationFixture
{
    public IReadOnlyList<CalibratedSweep> Sweeps { get; } = SimulatedSweeps.Calibrated(Scenarios.Demo(), useTrueAxis: true);

    private UnfoldResult? _grid;

    /// <summary>The uncancelled grid unfold of <see cref="Sweeps"/> (made once, on first use).</summary>
    public UnfoldResult Grid
    {
        get
        {
            lock (this) return _grid ??= Unfolder.Run(Sweeps);
        }
    }
}

/// <summary>
/// Cancellation reaches Core and Methods only as an explicit token (DEVELOPERS.md, "Cancellation"): every long-running
/// entry point stops with <see cref="OperationCanceledException"/> when its token is cancelled before the call, and the
/// unfold and the refinement also when it is cancelled from their progress while they run. All data simulated.
/// </summary>
public sealed class ExplicitCancellationTests(CancellationFixture fx) : IClassFixture<CancellationFixture>
{
    private static CancellationToken Cancelled() => new(canceled: true);

    /// <summary>Progress that acts at once, on the reporting thread (<see cref="Progress{T}"/> posts to the thread pool).</summary>
    private sealed class InlineProgress(Action<string> action) : IProgress<string>
    {
        public void Report(string value) => action(value);
    }

    [Fact]
    public void The_nnls_solvers_stop_on_a_cancelled_token()
    {
        var c = DenseSupportCase.Create(4000, 1000);
        var problem = Unfolder.BuildProblem(c.Sweeps, c.Grid, c.OffsetsHz, c.Gains, new UnfoldOptions(), c.PeriodicStepHz);
        var activeSet = Unfolder.SolverOptions(problem);
        Assert.ThrowsAny<OperationCanceledException>(() => ActiveSetNnls.Solve(problem, activeSet, cancellationToken: Cancelled()));
        Assert.ThrowsAny<OperationCanceledException>(() => DenseNnls.Solve(problem, cancellationToken: Cancelled()));
        foreach (var choice in new[] { SolverChoice.Auto, SolverChoice.ActiveSet, SolverChoice.Dense })
            Assert.ThrowsAny<OperationCanceledException>(() =>
                NnlsSolver.Solve(problem, choice, activeSet, problem.L1Weight, problem.SmoothnessWeight, cancellationToken: Cancelled()));
        // without a token the same solves iterate: the exceptions above are the token's, not the problem's
        Assert.True(ActiveSetNnls.Solve(problem, activeSet with { MaxIterations = 20 }).Iterations > 0);
        Assert.True(DenseNnls.Solve(problem, new DenseNnls.Options { MaxIterations = 3 }).Iterations > 0);
    }

    [Fact]
    public void A_levenberg_marquardt_fit_stops_on_the_token_of_its_settings_or_of_its_budget()
    {
        // y = a·exp(−x/τ) sampled without noise (simulated), residuals and Jacobian of the model: a fit that converges in a
        // few iterations when not stopped
        var x = Enumerable.Range(0, 50).Select(i => 0.1 * i).ToArray();
        var y = x.Select(v => 2 * Math.Exp(-v / 1.5)).ToArray();
        ResidualFunction residuals = (p, r, jacobian) =>
        {
            for (var i = 0; i < x.Length; i++)
            {
                var e = Math.Exp(-x[i] / p[1]);
                r[i] = y[i] - p[0] * e;
                if (jacobian is null) continue;
                jacobian[i, 0] = e;
                jacobian[i, 1] = p[0] * e * x[i] / (p[1] * p[1]);
            }
        };
        var settings = LmSettings.Relative(100, 1e-12);
        Assert.True(LevenbergMarquardt.MinimiseResiduals(residuals, [1, 1], x.Length, settings).Converged);
        Assert.ThrowsAny<OperationCanceledException>(() =>
            LevenbergMarquardt.MinimiseResiduals(residuals, [1, 1], x.Length, settings with { CancellationToken = Cancelled() }));
        var budget = new WorkBudget(1000, double.PositiveInfinity, cancellationToken: Cancelled());
        Assert.ThrowsAny<OperationCanceledException>(() =>
            LevenbergMarquardt.MinimiseResiduals(residuals, [1, 1], x.Length, settings with { Budget = budget }));
        Assert.Equal(0, budget.Used);
    }

    [Fact]
    public void The_unfold_stops_on_a_token_cancelled_before_the_call()
    {
        Assert.ThrowsAny<OperationCanceledException>(() => Unfolder.Run(fx.Sweeps, cancellationToken: Cancelled()));
    }

    [Theory]
    [InlineData("finding sweep offsets")] // the pair solves of the offset search stop
    [InlineData("solving NNLS on all sweeps")] // the joint solve stops
    public void The_unfold_stops_when_cancelled_from_its_progress(string stage)
    {
        using var cts = new CancellationTokenSource();
        var seen = new List<string>();
        var progress = new InlineProgress(message =>
        {
            seen.Add(message);
            if (message.StartsWith(stage, StringComparison.Ordinal)) cts.Cancel();
        });
        Assert.ThrowsAny<OperationCanceledException>(() => Unfolder.Run(fx.Sweeps, progress: progress, cancellationToken: cts.Token));
        Assert.True(cts.IsCancellationRequested, "the stage was never reached: " + string.Join(" | ", seen));
        // nothing after the stage that was stopped was reported
        Assert.StartsWith(stage, seen[^1], StringComparison.Ordinal);
    }

    [Fact]
    public void The_line_refinement_stops_before_the_call_and_when_cancelled_from_its_progress()
    {
        var grid = fx.Grid;
        Assert.ThrowsAny<OperationCanceledException>(() => LineRefiner.Refine(fx.Sweeps, grid, cancellationToken: Cancelled()));

        using var cts = new CancellationTokenSource();
        var progress = new InlineProgress(message =>
        {
            if (message.StartsWith("refinement round 1", StringComparison.Ordinal)) cts.Cancel();
        });
        Assert.ThrowsAny<OperationCanceledException>(() => LineRefiner.Refine(fx.Sweeps, grid, progress: progress, cancellationToken: cts.Token));
        Assert.True(cts.IsCancellationRequested);
    }

    [Fact]
    public void Self_calibration_stops_on_a_cancelled_token()
    {
        var spec = Scenarios.Single();
        var trace = Simulator.Trace(spec, spec.Cavities[0], false, new Random(spec.Seed));
        var sweep = SimulatedSweeps.Halves(trace, "A")[0];
        Assert.ThrowsAny<OperationCanceledException>(() => SelfCalibrator.Calibrate(sweep, spec.Cavities[0].Instrument, cancellationToken: Cancelled()));
    }

    [Fact]
    public void The_family_fit_stops_on_a_cancelled_token()
    {
        // one line through a cavity with one transverse family (simulated), the grid result built by hand
        var cavity = new Instrument("cav", 3e9, 500) { Families = [new CavityModeFamily(1, 0.4877, 0.35, "simulated")] };
        var spec = new RefinerFixtures.FixtureSweep(cavity, 4000, 2.2, 1.1e8);
        var sweeps = new[] { RefinerFixtures.Sweep("s0", spec, [new RefinerFixtures.Line(0, 1)], new Random(5)) };
        var grid = RefinerFixtures.Grid(sweeps, [spec], [new RefinerFixtures.Line(0, 1)], -1.5e9, 1.5e9, false);
        Assert.NotNull(FamilyFit.Fit(sweeps, grid, "cav"));
        Assert.ThrowsAny<OperationCanceledException>(() => FamilyFit.Fit(sweeps, grid, "cav", cancellationToken: Cancelled()));
    }

    [Fact]
    public void The_planner_search_and_the_what_if_stop_on_a_cancelled_token()
    {
        var first = Instrument.FromLength("first", 0.100, CavityGeometry.Planar, 150);
        var family = new CavityFamily(CavityGeometry.Planar, 150);
        var settings = new PlanSettings { SpanHz = 20e9, ThresholdLinewidths = 3 };
        var candidates = CandidateLengths.Range(0.080, 0.120, 0.001);
        Assert.ThrowsAny<OperationCanceledException>(() =>
            Planner.RankAddedCavity([new DesignCavity(first)], candidates, family, settings, cancellationToken: Cancelled()));
        var pairs = Planner.RankAddedCavity([new DesignCavity(first)], candidates, family, settings).Take(2).ToList();
        Assert.ThrowsAny<OperationCanceledException>(() => Planner.RankThirdCavity(pairs, candidates, family, settings, cancellationToken: Cancelled()));
        Assert.ThrowsAny<OperationCanceledException>(() =>
            WhatIf.Run(pairs[0].Instruments, [new SimulatedLine(0, 1), new SimulatedLine(3.2e9, 0.5)], cancellationToken: Cancelled()));
    }

    [Fact]
    public void The_pipeline_stops_and_a_staged_folder_is_not_published_on_a_cancelled_token()
    {
        var setup = Path.Combine(RepositoryRoot.Folder, "data", "demo", "setup.toml");
        Assert.ThrowsAny<OperationCanceledException>(() => UnfoldPipeline.Run(setup, cancellationToken: Cancelled()));

        var target = Path.Combine(Path.GetTempPath(), $"orderunfold-cancel-{Guid.NewGuid():N}");
        using (var staged = StagedFolder.Create(target))
        {
            File.WriteAllText(Path.Combine(staged.Path, "a.txt"), "simulated");
            Assert.ThrowsAny<OperationCanceledException>(() => staged.Publish("a.txt", Cancelled()));
        }

        Assert.False(Directory.Exists(target));
    }
}
