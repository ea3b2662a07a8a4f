using OrderUnfold.Benchmarks;
using OrderUnfold.Inversion;
using Xunit;

namespace OrderUnfold.Tests.Inversion;

/// <summary>The unfold's fixed numbers are options that take effect (simulated sweeps of the dense-support case).</summary>
public class UnfoldThresholdsTests
{
    [Fact]
    public void The_default_grid_step_follows_the_bins_per_linewidth()
    {
        var c = DenseSupportCase.Create(4000, 1000);
        var coarse = Unfolder.LayOutGrid(c.Sweeps, new UnfoldOptions());
        var fine = Unfolder.LayOutGrid(c.Sweeps, new UnfoldOptions { Thresholds = new UnfoldThresholds { GridBinsPerLinewidth = 8 } });
        var narrowest = c.Sweeps.Min(s => s.Instrument.LinewidthHz);
        Assert.Equal(narrowest / 4, coarse.StepHz);
        Assert.Equal(narrowest / 8, fine.StepHz);
        Assert.Equal(coarse.UnambiguousHz, fine.UnambiguousHz);
        Assert.Equal(Math.Min(coarse.StepHz / 2, narrowest / 20), coarse.PeriodicStepHz);
    }

    [Fact]
    public void The_solver_cap_follows_the_thresholds()
    {
        var c = DenseSupportCase.Create(4000, 1000);
        var problem = Unfolder.BuildProblem(c.Sweeps, c.Grid, c.OffsetsHz, c.Gains, new UnfoldOptions(), c.PeriodicStepHz);
        Assert.Equal(Math.Min(2500, Math.Max(500, c.Grid.Count / 4)), Unfolder.SolverOptions(problem).MaxIterations);
        Assert.Equal(7, Unfolder.SolverOptions(problem, new UnfoldThresholds { Solve = new GridSolveThresholds { MinIterations = 7, MaxIterations = 7 } }).MaxIterations);
    }
}
