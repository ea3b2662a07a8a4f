using OrderUnfold.Benchmarks;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using Xunit;

namespace OrderUnfold.Tests.Inversion;

/// <summary>The grid size limit follows the estimated memory (simulated sweeps of the dense-support case).</summary>
public class UnfoldMemoryTests
{
    [Fact]
    public void EstimateGrowsWithBinsAndSamples()
    {
        Assert.True(UnfoldMemory.EstimateUnfoldBytes(1_000_000, 40_000) > UnfoldMemory.EstimateUnfoldBytes(100_000, 40_000));
        Assert.True(UnfoldMemory.EstimateUnfoldBytes(100_000, 400_000) > UnfoldMemory.EstimateUnfoldBytes(100_000, 40_000));
        // 10⁶ bins (a 1 THz window at 1 MHz) fit in the default limit; 10⁷ bins do not
        Assert.True(UnfoldMemory.EstimateUnfoldBytes(1_000_000, 40_000) < new UnfoldOptions().MaxMemoryBytes);
        Assert.True(UnfoldMemory.EstimateUnfoldBytes(10_000_000, 40_000) > new UnfoldOptions().MaxMemoryBytes);
    }

    [Fact]
    public void WindowNeedingMoreMemoryThanTheLimitIsRefusedWithTheEstimate()
    {
        var c = DenseSupportCase.Create(4000, 1000);
        var options = new UnfoldOptions { WindowStartHz = -5e9, WindowEndHz = 5e9, MaxMemoryBytes = 10_000_000 };
        var e = Assert.Throws<InputException>(() => Unfolder.Run(c.Sweeps, options));
        Assert.Contains("grid bins", e.Message);
        Assert.Contains("of memory, more than the limit of 10 MB", e.Message);
        Assert.Contains("max_memory", e.Message);
    }

    [Fact]
    public void WindowBeyondTheOldFixedBinCountIsNotRefusedWhenMemoryAllows()
    {
        // 300 000 bins exceeded the former fixed limit of 200 000; the estimate (~0.4 GB) is below the default limit, so
        // the check passes and the unfold proceeds (it is stopped here by the progress callback to keep the test short)
        var c = DenseSupportCase.Create(4000, 1000);
        var step = 2.5e6;
        var options = new UnfoldOptions { WindowStartHz = -150_000 * step, WindowEndHz = 150_000 * step, GridStepHz = step };
        var messages = new List<string>();
        var stop = new StopAfterGrid(messages);
        Assert.Throws<OperationCanceledException>(() => Unfolder.Run(c.Sweeps, options, stop));
        Assert.Contains(messages, m => m.StartsWith("grid of 30000", StringComparison.Ordinal) && m.Contains("estimated memory"));
    }

    private sealed class StopAfterGrid(List<string> messages) : IProgress<string>
    {
        public void Report(string value)
        {
            messages.Add(value);
            if (value.StartsWith("grid of", StringComparison.Ordinal)) throw new OperationCanceledException();
        }
    }
}
