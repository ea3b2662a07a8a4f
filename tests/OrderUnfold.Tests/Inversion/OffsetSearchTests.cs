using OrderUnfold.Analysis;
using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;

namespace OrderUnfold.Tests.Inversion;

/// <summary>
/// The coarse-to-fine offset search (<see cref="OffsetSearch"/>): the FFT cross-correlation against its definition, the
/// bounded sub-window, the score at the true origin, and the origin a whole unfold finds on a window far wider than the
/// instruments can unfold (SIMULATED DATA: the demo scenario, two cavities).
/// </summary>
public class OffsetSearchTests
{
    [Fact]
    public void CrossCorrelationEqualsItsDefinition()
    {
        // C(δ) = Σ_u P_k(u) P_ref(u + δ), cyclic; random profiles
        var rng = new Random(7);
        const int m = 64;
        var reference = Enumerable.Range(0, m).Select(_ => rng.NextDouble() - 0.5).ToArray();
        var other = Enumerable.Range(0, m).Select(_ => rng.NextDouble() - 0.5).ToArray();
        var c = FoldedProfile.CrossCorrelation(reference, other);
        for (var d = 0; d < m; d++)
        {
            var direct = 0.0;
            for (var u = 0; u < m; u++) direct += other[u] * reference[(u + d) % m];
            Assert.Equal(direct, c[d], 1e-12);
        }
    }

    [Fact]
    public void ShiftFindsACircularShiftToSubBinPrecision()
    {
        // a profile and the same profile moved by 5.3 bins: Shift returns the move (in Hz, FSR = M bins of 1 Hz)
        const int m = 256;
        double Peak(double u, double centre) => 1 / (1 + Math.Pow((u - centre) / 3, 2));
        var reference = Enumerable.Range(0, m).Select(u => Peak(u, 100) + 0.5 * Peak(u, 180)).ToArray();
        var moved = Enumerable.Range(0, m).Select(u => Peak(u, 100 - 5.3) + 0.5 * Peak(u, 180 - 5.3)).ToArray();
        Assert.Equal(5.3, FoldedProfile.Shift(reference, moved, m), 0.1);
    }

    [Fact]
    public void SearchWindowIsTheWholeWindowUpToTheFarAliasAndBoundedBeyond()
    {
        var c = Demo();
        var pair = c.Sweeps.Select(s => s.Instrument).ToList();
        var lw = pair.Min(i => i.LinewidthHz);
        var step = lw / 4;
        // the default window (the unambiguous range at 3 linewidths) is searched whole
        var u = AliasMargin.FirstAlias(pair, 3, 1e12);
        var small = FrequencyGrid.Covering(-u / 2, u / 2, step);
        Assert.Equal((small.StartHz, small.EndHz), OffsetSearch.SearchWindow(pair, small, 3));
        // 10⁶ bins (2.5 THz): cut to ± the first shift with a margin below one linewidth, around the anchor
        var wide = new FrequencyGrid(-500_000 * step, step, 1_000_000);
        var far = AliasMargin.FirstBelow(pair, OffsetSearch.FarThresholdLinewidths, AliasMargin.DefaultMinimumShiftHz(pair, 3), 1e13)!.Value;
        var (lo, hi) = OffsetSearch.SearchWindow(pair, wide, 3);
        Assert.Equal(-far, lo, 1.0);
        Assert.Equal(far, hi, 1.0);
        Assert.True(hi - lo < 0.03 * (wide.EndHz - wide.StartHz));
        // a window that does not hold the anchor: the sub-window sits at its end nearest to it
        var aside = new FrequencyGrid(10e9, step, 1_000_000);
        var (lo2, hi2) = OffsetSearch.SearchWindow(pair, aside, 3);
        Assert.Equal(aside.StartHz, lo2, 1.0);
        Assert.Equal(aside.StartHz + 2 * far, hi2, 1.0);
    }

    [Fact]
    public void ScoreIsHighestAtTheTrueRelativeOriginUpToATranslation()
    {
        // The simulator's offsets are the truth; the reference's origin is set to its true value. Origins of B that differ
        // by a multiple m of A's FSR describe the same spectrum translated by m·FSR_A, which A cannot tell, so the score's
        // maximum must lie within a linewidth of B's true origin + m·FSR_A for some m that keeps the lines in the sub-window.
        var c = Demo();
        var a = c.Sweeps[0];
        var b = c.Sweeps[1];
        var pa = FoldedProfile.Fold(a, OffsetSearch.ProfileBins(a.Instrument));
        var pb = FoldedProfile.Fold(b, OffsetSearch.ProfileBins(b.Instrument));
        var u = AliasMargin.FirstAlias([a.Instrument, b.Instrument], 3, 1e12);
        var score = OffsetSearch.Score(pa, a.Instrument.FsrHz, c.OffsetsHz[0], pb, b.Instrument.FsrHz, -u / 2, u / 2);
        var best = Array.IndexOf(score, score.Max());
        var phi = best * b.Instrument.FsrHz / score.Length;
        var reach = (int)Math.Ceiling(u / a.Instrument.FsrHz);
        var nearest = Enumerable.Range(-reach, 2 * reach + 1).Min(m =>
        {
            var d = SweepOperator.PositiveMod(phi - c.OffsetsHz[1] - m * a.Instrument.FsrHz, b.Instrument.FsrHz);
            return Math.Min(d, b.Instrument.FsrHz - d);
        });
        Assert.True(nearest < b.Instrument.LinewidthHz, $"score maximum {phi:G6} Hz is {nearest / b.Instrument.LinewidthHz:F2} linewidths from every translate of the true origin {c.OffsetsHz[1]:G6} Hz");
    }

    [Fact]
    public void TheOriginOnAWindowOfAMillionBinsIsTheOneOfTheDefaultWindow()
    {
        // Before the search was bounded, every origin fitted a 2.5 THz window about equally well (lines at alias positions):
        // the relative origin must not depend on the window's width. Compared modulo the FSR of B and the translation by
        // whole FSRs of A (the spectrum is reported relative to its strongest line).
        var c = Demo();
        var narrow = Unfolder.Run(c.Sweeps);
        var lw = c.Sweeps.Min(s => s.Instrument.LinewidthHz);
        var step = lw / 4;
        var wide = Unfolder.Run(c.Sweeps, new UnfoldOptions { WindowStartHz = -250_000 * step, WindowEndHz = 250_000 * step });
        var fa = c.Sweeps[0].Instrument.FsrHz;
        var fb = c.Sweeps[1].Instrument.FsrHz;
        double Relative(UnfoldResult r)
        {
            // φ_B − φ_A with φ_A brought to the same representative (the translation is a multiple of FSR_A)
            var shift = Math.Round((r.Sweeps[0].OffsetHz - narrow.Sweeps[0].OffsetHz) / fa) * fa;
            return r.Sweeps[1].OffsetHz - shift - (r.Sweeps[0].OffsetHz - shift);
        }

        var d = SweepOperator.PositiveMod(Relative(wide) - Relative(narrow), fb);
        Assert.True(Math.Min(d, fb - d) < 0.05 * lw, $"relative origins differ by {Math.Min(d, fb - d) / lw:F3} linewidth");
    }

    [Fact]
    public void TheAnchorIsPairedWithLowerPeaksOfTheOtherCavityToo()
    {
        // The demo scenario recorded with 50 000 samples per record (SIMULATED DATA, the demo's seed, axes calibrated from
        // the calibration records as the command line does). With the files `orderunfold simulate --samples 50000` writes,
        // the line under A's tallest folded peak (the anchor) lies under B's fifth tallest folded peak, and only B's four
        // tallest were paired with it: no candidate origin was right, and the unfold explained the sweeps with 427 lines
        // at alias positions (reduced χ² 1.64; with refine = true the line fit ran out of its budget and the run was
        // refused). Lower peaks are paired too now. This test fails with the old pairing (far more than six lines).
        var demo = Scenarios.Demo();
        var spec = demo with { Cavities = demo.Cavities.Select(c => c with { Samples = 50_000 }).ToList() };
        var sweeps = SimulatedSweeps.Calibrated(spec);
        var result = Unfolder.Run(sweeps);
        var lw = sweeps.Min(s => s.Instrument.LinewidthHz);
        var strongest = spec.Lines.MaxBy(l => l.Intensity)!.FrequencyHz;
        var truth = spec.Lines.Select(l => l.FrequencyHz - strongest).Order().ToList();
        Assert.Equal(truth.Count, result.Lines.Count);
        // within a tenth of the linewidth (the field-trace tolerance's 0.1 FWHM, shared/field-traces/README.md)
        for (var k = 0; k < truth.Count; k++) Assert.Equal(truth[k], result.Lines[k].FrequencyHz, 0.1 * lw);
    }

    private static Case Demo()
    {
        var demo = Scenarios.Demo();
        var spec = demo with
        {
            Cavities = demo.Cavities.Select(c => c with { Samples = 8_000, SpanFsr = 5 }).ToList(),
            Triangle = false,
            Seed = 11,
        };
        var rng = new Random(spec.Seed);
        var sweeps = new List<CalibratedSweep>();
        var offsets = new List<double>();
        foreach (var cav in spec.Cavities)
        {
            var trace = Simulator.Trace(spec, cav, calibration: false, rng);
            sweeps.Add(new CalibratedSweep(cav.Instrument.Name, cav.Instrument, trace.TrueScanHz, trace.Signal, NoiseEstimator.FirstDifferenceSigma(trace.Signal)));
            offsets.Add(trace.OffsetHz);
        }

        return new Case(sweeps, offsets.ToArray());
    }

    private sealed record Case(List<CalibratedSweep> Sweeps, double[] OffsetsHz);
}
