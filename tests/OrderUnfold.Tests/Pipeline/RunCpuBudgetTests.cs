using OrderUnfold.Analysis;
using OrderUnfold.Pipeline;
using Xunit;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>
/// The line fit gets the CPU time the stages before it left of the run's budget (<see cref="UnfoldPipeline.RunCpuBudgetSeconds"/>),
/// between <see cref="UnfoldPipeline.MinLineFitCpuSeconds"/> and its own budget: a run whose grid stage took long cannot add
/// the line fit's whole 8 s on top (a cavity stated confocal instead of planar, two simulated records of 50 000 samples:
/// 14 s before the line fit, 23 s in all; docs/performance.md).
/// </summary>
public class RunCpuBudgetTests
{
    [Theory]
    [InlineData(0.5, 8)] // a quick grid: the line fit's own budget
    [InlineData(10, 5)] // what is left of 15 s
    [InlineData(14, 2)] // 1 s left: the floor
    [InlineData(40, 2)] // never less than the floor
    public void TheLineFitGetsWhatTheRunLeft(double usedSeconds, double expected)
    {
        Assert.Equal(8, new RefineOptions().CpuBudgetSeconds);
        Assert.Equal(expected, UnfoldPipeline.LineFitCpuSeconds(usedSeconds), 12);
    }
}
