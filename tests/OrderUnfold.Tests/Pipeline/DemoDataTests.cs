using OrderUnfold.Simulation;
using Xunit;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>The committed demo data (simulated) is exactly what the simulator writes for the demo scenario.</summary>
public class DemoDataTests
{
    private static string DemoDir()
    {
        for (var dir = new DirectoryInfo(AppContext.BaseDirectory); dir is not null; dir = dir.Parent)
        {
            var candidate = Path.Combine(dir.FullName, "data", "demo");
            if (File.Exists(Path.Combine(candidate, "setup.toml"))) return candidate;
        }

        throw new DirectoryNotFoundException("data/demo not found above the test folder");
    }

    [Fact]
    public void RegeneratingTheDemoGivesTheCommittedFiles()
    {
        var tmp = Directory.CreateTempSubdirectory("ou-demo-").FullName;
        try
        {
            var output = SimulationFiles.WriteScenario(Scenarios.Demo(), tmp);
            var demo = DemoDir();
            foreach (var file in output.Files)
            {
                var name = Path.GetFileName(file);
                var committed = Path.Combine(demo, name);
                Assert.True(File.Exists(committed), $"{name} is missing from data/demo");
                Assert.True(File.ReadAllBytes(file).AsSpan().SequenceEqual(File.ReadAllBytes(committed)),
                    $"data/demo/{name} differs from what 'orderunfold simulate --scenario demo' writes; regenerate it");
            }
        }
        finally
        {
            Directory.Delete(tmp, recursive: true);
        }
    }
}
