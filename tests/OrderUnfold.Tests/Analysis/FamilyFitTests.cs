using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Analysis;

/// <summary>
/// Fitting a cavity's transverse families to the sweeps with the lines held. The sweeps are SIMULATED here: one line
/// through a 3 GHz cavity of finesse 500 whose N = 1 and N = 2 families sit at Gouy offsets 0.4877 and 0.9755 FSR with
/// 35 % and 10 % of TEM00; the fit starts from values off by 0.0008 FSR (0.4 linewidth) and 15–20 % in height.
/// </summary>
public sealed class FamilyFitTests(ITestOutputHelper output)
{
    [Fact]
    public void The_fit_recovers_the_simulated_offsets_and_heights()
    {
        var truth = new Instrument("cav", 3e9, 500) { Families = [new CavityModeFamily(1, 0.4877, 0.35, "simulated"), new CavityModeFamily(2, 0.9755, 0.10, "simulated")] };
        var start = truth with { Families = [new CavityModeFamily(1, 0.4885, 0.30, "measured"), new CavityModeFamily(2, 0.9747, 0.12, "measured")] };
        var rng = new Random(11);
        var specs = new[] { new RefinerFixtures.FixtureSweep(start, 9000, 2.2, 1.1e8, 1.0, 0.02, 0.005), new RefinerFixtures.FixtureSweep(start, 9000, 2.2, -4.0e8, 0.9, 0.03, 0.005) };
        var sweeps = specs.Select((s, k) =>
        {
            var scan = Enumerable.Range(0, s.Samples).Select(i => s.SpanFsr * s.Instrument.FsrHz * i / s.Samples).ToArray();
            var y = scan.Select(f => s.Gain * truth.Response(0 - s.OffsetHz - f) + s.Background + s.NoiseSigma * Simulator.Gaussian(rng)).ToArray();
            return new CalibratedSweep($"s{k}", start, scan, y, s.NoiseSigma);
        }).ToList();
        var grid = RefinerFixtures.Grid(sweeps, specs, [new RefinerFixtures.Line(0, 1)], -1.5e9, 1.5e9, false);
        var fit = FamilyFit.Fit(sweeps, grid, "cav")!;
        output.WriteLine($"χ² {fit.ChiSquareBefore:G5} → {fit.ChiSquareAfter:G5} ({fit.Iterations} iterations, converged {fit.Converged})");
        foreach (var f in fit.Families) output.WriteLine($"N={f.N} apparent {f.ApparentOffsetFsr:F5} ± {f.OffsetSigmaFsr:G2}, height {f.RelativeHeight:F4} ± {f.HeightSigma:G2}");
        Assert.True(fit.Converged);
        Assert.True(fit.ChiSquareAfter < fit.ChiSquareBefore);
        foreach (var t in truth.Families)
        {
            var f = Assert.Single(fit.Families, f => f.N == t.N);
            // within four stated σ (and the σ small: a few 10⁻⁵ FSR, a few 10⁻³ in height at this noise)
            Assert.InRange(Math.Abs(f.ApparentOffsetFsr - t.ApparentOffsetFsr), 0, 4 * f.OffsetSigmaFsr + 1e-6);
            Assert.InRange(Math.Abs(f.RelativeHeight - t.RelativeHeight), 0, 4 * f.HeightSigma + 1e-6);
            Assert.True(f.OffsetSigmaFsr < 2e-4 && f.HeightSigma < 0.01);
        }
    }
}
