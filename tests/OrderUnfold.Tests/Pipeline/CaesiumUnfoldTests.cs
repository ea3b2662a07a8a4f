using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Pipeline;

public class CaesiumUnfoldTests(ITestOutputHelper output)
{
    // Caesium-133 ground-state hyperfine splitting: 9 192 631 770 Hz exactly, by the SI definition of the second
    // (BIPM SI Brochure, 9th ed., 2019, §2.3.1).
    private const double CsHyperfineHz = 9_192_631_770;

    [Fact]
    public void TwoGroupsOneHyperfineSplittingApartComeBackWithThatSeparation()
    {
        // Simulated source: two groups of lines 9 192 631 770 Hz apart (groups of 2 and 3 lines).
        var lines = new[]
        {
            new SimulatedLine(0, 1.0), new SimulatedLine(151e6, 0.55),
            new SimulatedLine(CsHyperfineHz, 0.8), new SimulatedLine(CsHyperfineHz + 237e6, 0.45), new SimulatedLine(CsHyperfineHz - 263e6, 0.3),
        };
        var spec = new SimulationSpec
        {
            Lines = lines,
            Cavities =
            [
                new SimulatedCavity { Instrument = Instrument.FromLength("short", 0.1, CavityGeometry.Planar, 150), Gain = 0.9, SpanFsr = 6, Samples = 16000 },
                new SimulatedCavity { Instrument = Instrument.FromLength("long", 0.0937, CavityGeometry.Planar, 150), Gain = 1.2, Quadratic = 0.04, Cubic = -0.02, SpanFsr = 6, Samples = 16000 },
            ],
            Seed = 7,
        };
        var sweeps = SimulatedSweeps.Calibrated(spec);
        var result = Unfolder.Run(sweeps);
        foreach (var l in result.Lines) output.WriteLine($"{l.FrequencyHz / 1e6,12:F2} MHz  {l.Intensity:F3}  snr {l.Snr:F0}");
        foreach (var s in result.Sweeps) output.WriteLine($"{s.Name}: chi2r {s.ReducedChiSquare:F2} gain {s.Gain:F3}");
        output.WriteLine($"solver {result.Solver.Iterations} it, {result.Solver.Status}, active {result.Solver.ActiveCount}");
        foreach (var w in result.Warnings) output.WriteLine(w);

        Assert.Equal(lines.Length, result.Lines.Count);
        var found = result.Lines.Select(l => l.FrequencyHz).ToArray();
        // strongest line is the anchor (0); the strongest of the other group sits one hyperfine splitting away
        var other = result.Lines.Where(l => Math.Abs(l.FrequencyHz) > 5e9).MaxBy(l => l.Intensity)!;
        Assert.InRange(Math.Abs(other.FrequencyHz), CsHyperfineHz - 3e6, CsHyperfineHz + 3e6);
    }
}
