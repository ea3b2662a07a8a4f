using OrderUnfold.Instruments;
using OrderUnfold.Planning;
using OrderUnfold.Simulation;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Planning;

/// <summary>Simulated measurements with planned designs. The source and all sweeps are simulated.</summary>
public class WhatIfTests(ITestOutputHelper output)
{
    [Fact]
    public void RecommendedDesignRecoversEveryLineWhereAOneToTwoDesignDoesNot()
    {
        var first = Instrument.FromLength("first", 0.100, CavityGeometry.Planar, 60); // FSR 1.499 GHz
        // simulated source: 4 lines over 5.9 GHz, about two FSRs of the 1:2 design's larger cavity (3.0 GHz)
        SimulatedLine[] lines = [new(0, 1.0), new(1.37e9, 0.7), new(3.81e9, 0.5), new(5.92e9, 0.35)];

        var ranked = Planner.RankAddedCavity([new DesignCavity(first)], CandidateLengths.Range(0.080, 0.120, 0.0005),
            new CavityFamily(CavityGeometry.Planar, 60, 0.05e-3), new PlanSettings { SpanHz = 6.5e9 });
        var recommended = ranked[0];
        Assert.True(recommended.Passes);
        output.WriteLine($"recommended {recommended.Added[0].Describe()}: worst {recommended.Robust.MarginLinewidths:F2} linewidths");

        var good = WhatIf.Run(recommended.Instruments, lines);
        Report("recommended", good);
        Assert.True(good.Passes);
        Assert.All(good.Lines, l => Assert.InRange(Math.Abs(l.ErrorHz!.Value), 0, 5e6));

        // 50 mm: FSR 2.998 GHz = 2·FSR₁, so every shift by 2.998 GHz is an exact alias
        Instrument[] poor = [first, Instrument.FromLength("half", 0.050, CavityGeometry.Planar, 60)];
        var bad = WhatIf.Run(poor, lines);
        Report("1:2", bad);
        Assert.False(bad.Passes);
    }

    private void Report(string name, WhatIfResult r)
    {
        output.WriteLine($"{name}: passes {r.Passes}, ghosts {r.Ghosts.Count}, alignment {r.AlignmentHz / 1e6:F1} MHz");
        foreach (var l in r.Lines)
            output.WriteLine($"  {l.RelativeHz / 1e9,7:F3} GHz -> {(l.Found is null ? "missing" : $"{l.Found.FrequencyHz / 1e9:F4} GHz, I {l.Found.Intensity:F2}")}");
        foreach (var g in r.Ghosts) output.WriteLine($"  ghost {g.FrequencyHz / 1e9:F4} GHz, I {g.Intensity:F2}");
    }
}
