using OrderUnfold.Cli;
using OrderUnfold.Pipeline;
using OrderUnfold.Pipeline.Batch;
using Xunit;

// Namespace deliberately not OrderUnfold.Tests.Cli: a namespace named Cli under OrderUnfold.Tests would hide the
// OrderUnfold.Cli.Cli class from other test folders that write Cli.Cli.Run.
namespace OrderUnfold.Tests.CommandLine;

/// <summary>
/// The batch command runs the item analysis it is given (<see cref="CliServices.BatchItemAnalysis"/>), not one set in
/// a static: two runs in one process with different analyses do not see each other's. Data: a small simulated archive.
/// </summary>
public sealed class CliServicesTests(CliTestFolder folder) : IClassFixture<CliTestFolder>
{
    private readonly string _dir = Path.Combine(folder.Root, "services");

    /// <summary>Counts the items it is asked about and fills the mode-spacing column with a marker.</summary>
    private sealed class Marking(string marker) : IItemAnalysis
    {
        public int Calls;
        public string Identity => "marking " + marker;

        public IReadOnlyDictionary<string, string> Analyse(UnfoldRun run)
        {
            Interlocked.Increment(ref Calls);
            return new Dictionary<string, string> { [SummaryTable.ModeSpacingColumn] = marker };
        }
    }

    private int Batch(string manifest, string output, IItemAnalysis analysis) =>
        OrderUnfold.Cli.Cli.Run(["batch", manifest, "--out", output, "--jobs", "1", "--quiet"], new StringWriter(), new StringWriter(),
            services: new CliServices { BatchItemAnalysis = analysis });

    [Fact]
    public void BatchUsesTheItemAnalysisPassedIn()
    {
        var archive = Path.Combine(_dir, "archive");
        Assert.Equal(0, CliRun.Run("simulate-archive", "--out", archive, "--items", "3").Code);
        var manifest = Path.Combine(archive, "manifest.csv");

        var first = new Marking("111");
        var second = new Marking("222");
        Assert.Equal(0, Batch(manifest, Path.Combine(_dir, "first"), first));
        Assert.Equal(0, Batch(manifest, Path.Combine(_dir, "second"), second));
        Assert.Equal(3, first.Calls);
        Assert.Equal(3, second.Calls);
        Assert.Equal(3, File.ReadAllLines(Path.Combine(_dir, "first", "summary.csv")).Count(l => l.Contains(",111,", StringComparison.Ordinal)));
        Assert.Equal(3, File.ReadAllLines(Path.Combine(_dir, "second", "summary.csv")).Count(l => l.Contains(",222,", StringComparison.Ordinal)));
    }
}
