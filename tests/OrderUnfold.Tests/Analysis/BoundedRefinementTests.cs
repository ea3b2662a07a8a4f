using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using Xunit;
using Xunit.Abstractions;
using static OrderUnfold.Tests.Analysis.RefinerFixtures;

namespace OrderUnfold.Tests.Analysis;

/// <summary>
/// The refinement's bounded cost: independent line groups (sparse Gauss–Newton matrix) against the dense joint fit, the
/// iteration budget and its fallback, the order check cut short by the budget, and the block (envelope) Cholesky of the
/// Levenberg–Marquardt solver. All data here is SIMULATED (see <see cref="RefinerFixtures"/>). Budgets are checked by
/// counted iterations, never by measured time.
/// </summary>
public class BoundedRefinementTests(ITestOutputHelper output)
{
    private static readonly Instrument CavityA = new("A", 1.0e9, 100); // linewidth 10 MHz
    private static readonly Instrument CavityB = new("B", 1.1e9, 110);

    /// <summary>Two cavities, three lines: two 15 linewidths apart in A (one group), one far from both in either cavity.</summary>
    private static (List<CalibratedSweep> Sweeps, UnfoldResult Grid, Line[] Truth) ThreeLines(int seed)
    {
        var specA = new FixtureSweep(CavityA, 3000, 3.2, 0.0, Background: 0.02, NoiseSigma: 0.01);
        var specB = new FixtureSweep(CavityB, 3000, 3.2, 0.31e9, Gain: 0.8, NoiseSigma: 0.01);
        Line[] truth = [new(0.20e9, 1.0), new(0.35e9, 0.5), new(2.67e9, 0.4)];
        var rng = new Random(seed);
        List<CalibratedSweep> sweeps = [Sweep("A", specA, truth, rng), Sweep("B", specB, truth, rng)];
        Line[] guesses = truth.Select(l => new Line(l.FrequencyHz + 1.5e6, 0.9 * l.Intensity)).ToArray();
        return (sweeps, Grid(sweeps, [specA, specB], guesses, -1e9, 4e9, true), truth);
    }

    /// <summary>
    /// Lines that share no sample within the Jacobian cutoff fit as independent blocks, and the result equals the dense
    /// joint fit: the model and gradient are exact in both, only the Gauss–Newton matrix differs (by products of Airy
    /// tails), so both stop at the same minimum — positions within 1 % of their standard error, χ² within 10⁻⁶ relative.
    /// </summary>
    [Fact]
    public void SeparateGroupsGiveTheJointFitsResult()
    {
        var (sweeps, grid, _) = ThreeLines(3);
        var (sparse, ds) = LineRefiner.Refine(sweeps, grid, new RefineOptions { JacobianCutoffLinewidths = 3 });
        var (dense, dd) = LineRefiner.Refine(sweeps, grid, new RefineOptions { JacobianCutoffLinewidths = double.PositiveInfinity });
        output.WriteLine($"groups: sparse {ds.Groups}, dense {dd.Groups}; iterations {ds.IterationsUsed} vs {dd.IterationsUsed}; χ² {ds.ChiSquare:G10} vs {dd.ChiSquare:G10}");
        Assert.True(ds.Groups >= 2, $"expected independent groups, got {ds.Groups}");
        Assert.Equal(1, dd.Groups);
        Assert.Equal(dense.Lines.Count, sparse.Lines.Count);
        Assert.Equal(dd.ChiSquare, ds.ChiSquare, dd.ChiSquare * 1e-6);
        for (var j = 0; j < dense.Lines.Count; j++)
        {
            var sigma = dense.Lines[j].FrequencySigmaHz ?? 0;
            output.WriteLine($"line {j}: {sparse.Lines[j].FrequencyHz / 1e6:F6} vs {dense.Lines[j].FrequencyHz / 1e6:F6} MHz (σ {sigma / 1e3:F2} kHz)");
            Assert.True(Math.Abs(sparse.Lines[j].FrequencyHz - dense.Lines[j].FrequencyHz) <= 0.01 * sigma + 1e-3,
                $"line {j} differs by {sparse.Lines[j].FrequencyHz - dense.Lines[j].FrequencyHz} Hz");
            Assert.Equal(dense.Lines[j].FrequencySigmaHz ?? 0, sparse.Lines[j].FrequencySigmaHz ?? 0, 0.02 * sigma + 1e-3);
        }
    }

    /// <summary>The grouping rule itself: lines farther apart than twice the cutoff reach (folded, in every instrument) are
    /// separate groups; lines closer in one instrument are one group.</summary>
    [Fact]
    public void GroupsFollowTheFoldedDistanceInEveryInstrument()
    {
        var (sweeps, _, _) = ThreeLines(1);
        var data = new SweepSamples(sweeps) { CutoffLinewidths = 3 };
        var layout = new ParameterLayout(3, 2, false);
        var p = new double[layout.Count];
        // 0 and 1: 150 MHz apart = 15 linewidths > 2·3·10 MHz in A; folded in B also 150 MHz: separate
        // 2: 1.0 GHz + 55 MHz from line 0 → folded distance 55 MHz in A (< 60 MHz): joined with line 0
        p[layout.Position(0)] = 0.20e9;
        p[layout.Position(1)] = 0.35e9;
        p[layout.Position(2)] = 1.255e9;
        var groups = data.LineGroups(layout, p);
        Assert.Equal(groups[0], groups[2]);
        Assert.NotEqual(groups[0], groups[1]);
        var dense = new SweepSamples(sweeps).LineGroups(layout, p);
        Assert.All(dense, g => Assert.Equal(0, g));
    }

    /// <summary>When the budget stops the refinement, grid candidates below min_snr (handed over for the refinement's own
    /// significance test, which never ran) are not reported as lines; the strongest line stays.</summary>
    [Fact]
    public void BudgetHitDropsUnjudgedCandidatesBelowMinSnr()
    {
        var (sweeps, grid, _) = ThreeLines(5);
        // the grid's lines as candidates: the weakest given an SNR below the report's threshold
        var weakest = grid.Lines.MinBy(l => l.RawIntensity)!;
        var candidates = grid with { Lines = grid.Lines.Select(l => ReferenceEquals(l, weakest) ? l with { Snr = 3 } : l).ToList() };
        var (result, diag) = LineRefiner.Refine(sweeps, candidates, new RefineOptions { IterationBudget = 3, MinSnr = 5 });
        Assert.True(diag.FellBackToGrid);
        Assert.Equal(grid.Lines.Count - 1, result.Lines.Count);
        Assert.DoesNotContain(result.Lines, l => l.FrequencyHz == weakest.FrequencyHz);
        Assert.Contains(result.Warnings, w => w.Contains("below min_snr") && w.Contains("left out"));
    }

    /// <summary>A tiny iteration budget stops the refinement: a warning, the grid result kept with widened frequency
    /// uncertainties (a bound of at least half a linewidth, combined with the anchor's), orders not judged, and the
    /// iterations spent within the budget (counted, not timed).</summary>
    [Fact]
    public void BudgetHitKeepsTheGridWithWiderSigmas()
    {
        var (sweeps, grid, _) = ThreeLines(5);
        var (result, diag) = LineRefiner.Refine(sweeps, grid, new RefineOptions { IterationBudget = 3 });
        output.WriteLine(string.Join("\n", result.Warnings));
        Assert.True(diag.FellBackToGrid);
        Assert.False(result.Refined);
        Assert.Contains("iteration budget (3)", diag.BudgetExhausted);
        Assert.InRange(diag.IterationsUsed, 1, 4); // the iteration that finds the budget spent is counted, not run
        Assert.Equal(3, diag.IterationBudget);
        Assert.Contains(result.Warnings, w => w.Contains("line refinement stopped") && w.Contains("iteration budget"));
        Assert.Equal(grid.Lines.Select(l => l.FrequencyHz), result.Lines.Select(l => l.FrequencyHz));
        Assert.All(result.Lines, l => Assert.Equal(OrderVerdict.Unknown, l.Verdict));
        Assert.All(result.Lines, l => Assert.Contains("not a fitted error", l.Note));
        var halfLw = 0.5 * CavityA.LinewidthHz;
        Assert.All(result.Lines.Where(l => l.FrequencyHz != 0), l => Assert.True(l.FrequencySigmaHz >= Math.Sqrt(2) * halfLw * 0.999));
    }

    /// <summary>With a budget that covers the line fit but not the whole order check, the refined lines are kept and the
    /// lines whose order check was cut short are marked unknown with a note and a warning.</summary>
    [Fact]
    public void BudgetHitDuringTheOrderCheckMarksOrdersUnknown()
    {
        var (sweeps, grid, _) = ThreeLines(7);
        var (_, full) = LineRefiner.Refine(sweeps, grid);
        Assert.Null(full.BudgetExhausted);
        var (result, diag) = LineRefiner.Refine(sweeps, grid, new RefineOptions { IterationBudget = full.IterationsUsed - 3 });
        output.WriteLine($"full run {full.IterationsUsed} iterations; cut: {diag.IterationsUsed}, {diag.BudgetExhausted}");
        Assert.False(diag.FellBackToGrid);
        Assert.True(result.Refined);
        Assert.NotNull(diag.BudgetExhausted);
        Assert.Contains(result.Lines, l => l.Verdict == OrderVerdict.Unknown && l.Note!.Contains("order not checked"));
        Assert.Contains(result.Warnings, w => w.Contains("order check stopped"));
    }

    /// <summary>A bootstrap cut short by the budget reports how far it got and no error estimate from too few replicates.</summary>
    [Fact]
    public void BootstrapRespectsTheBudget()
    {
        var (sweeps, grid, _) = ThreeLines(9);
        var (_, full) = LineRefiner.Refine(sweeps, grid);
        var (result, diag) = LineRefiner.Refine(sweeps, grid, new RefineOptions { Bootstrap = 200, IterationBudget = full.IterationsUsed + 12 });
        Assert.InRange(diag.IterationsUsed, full.IterationsUsed, full.IterationsUsed + 13);
        Assert.Contains(result.Warnings, w => w.Contains("bootstrap stopped after"));
        Assert.All(result.Lines, l => Assert.Null(l.BootstrapSigmaHz));
    }

    /// <summary>The envelope Cholesky of a block-arrowhead matrix (two blocks and a border) solves the system as the dense
    /// factorisation does (same matrix, random positive definite blocks; simulated).</summary>
    [Fact]
    public void EnvelopeCholeskyEqualsTheDenseOne()
    {
        var rng = new Random(2);
        int[] block = [0, 0, 0, 1, 1, -1, -1];
        var n = block.Length;
        var m = new double[n * n];
        var rows = Enumerable.Range(0, 12).Select(_ => Enumerable.Range(0, n).Select(_ => rng.NextDouble() - 0.5).ToArray()).ToArray();
        foreach (var r in rows)
            for (var i = 0; i < n; i++)
            for (var j = 0; j < n; j++)
                if (block[i] < 0 || block[j] < 0 || block[i] == block[j]) m[i * n + j] += r[i] * r[j];
        for (var i = 0; i < n; i++) m[i * n + i] += 0.1;
        int[] first = [0, 0, 0, 3, 3, 0, 0];
        var b = Enumerable.Range(0, n).Select(i => Math.Sin(i + 1.0)).ToArray();
        var dense = (double[])m.Clone();
        var envelope = (double[])m.Clone();
        Assert.True(LevenbergMarquardt.Cholesky(dense, n));
        Assert.True(LevenbergMarquardt.Cholesky(envelope, n, first));
        var x1 = new double[n];
        var x2 = new double[n];
        LevenbergMarquardt.Solve(dense, n, b, x1);
        LevenbergMarquardt.Solve(envelope, n, b, x2, first);
        for (var i = 0; i < n; i++) Assert.Equal(x1[i], x2[i], 1e-10);
    }
}
