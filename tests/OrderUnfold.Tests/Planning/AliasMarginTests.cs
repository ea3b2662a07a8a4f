using CsCheck;
using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Planning;
using Xunit;

namespace OrderUnfold.Tests.Planning;

/// <summary>The alias margin and its exact corners. Instruments here are invented (simulated) designs.</summary>
public class AliasMarginTests
{
    // FSR 1 GHz with finesse 100 and FSR 1.1 GHz with finesse 110: both linewidths are 10 MHz, the ratio is 10/11.
    private static readonly Instrument A = new("a", 1.0e9, 100);
    private static readonly Instrument B = new("b", 1.1e9, 110);
    private static readonly Instrument[] AB = [A, B];

    [Theory]
    // Δ = 2.5 GHz: 0.5 GHz from 2·1 GHz → 50 linewidths; 0.3 GHz from 2·1.1 GHz → 30; margin 50 (hand computed)
    [InlineData(2.5e9, 50, 30, 50)]
    // Δ = 0.25 GHz: 25 and 25 linewidths (0.25 GHz from 0 in both)
    [InlineData(0.25e9, 25, 25, 25)]
    // Δ = 1.05 GHz: 50 MHz from 1 GHz and from 1.1 GHz → 5 and 5
    [InlineData(1.05e9, 5, 5, 5)]
    // Δ = 11 GHz = 11·1 GHz = 10·1.1 GHz: an exact repeat, zero everywhere
    [InlineData(11e9, 0, 0, 0)]
    // Δ = −3.3 GHz: sign does not matter; 0.3 GHz from 3 GHz → 30, exactly 3·1.1 GHz → 0
    [InlineData(-3.3e9, 30, 0, 30)]
    public void MisfitAndMarginMatchHandComputedValues(double delta, double misfitA, double misfitB, double margin)
    {
        Assert.Equal(misfitA, AliasMargin.Misfit(A, delta), 6);
        Assert.Equal(misfitB, AliasMargin.Misfit(B, delta), 6);
        Assert.Equal(margin, AliasMargin.Margin(AB, delta), 6);
    }

    [Fact]
    public void WorstAliasIsAtTheCrossingBetweenNearlyCoincidentMultiples()
    {
        // Multiples 1 GHz and 1.1 GHz are 100 MHz apart. Between them misfit_a rises and misfit_b falls at 1 per
        // 10 MHz; they cross at 1.05 GHz with 50 MHz / 10 MHz = 5 linewidths (hand computed). At either multiple the
        // margin is 10, so evaluating only at multiples would overstate the worst alias by a factor of two.
        var min = AliasMargin.Minimum(AB, 0.1e9, 10.5e9);
        Assert.Equal(5.0, min.MarginLinewidths, 9);
        Assert.Equal(1.05e9, min.DeltaHz, 1);
        Assert.Equal(10.0, AliasMargin.Margin(AB, 1.0e9), 9);
        Assert.Equal(10.0, AliasMargin.Margin(AB, 1.1e9), 9);
        var lowest = AliasMargin.LowestAlias(AB, 0.1e9, 10.5e9);
        Assert.Equal(5.0, lowest.MarginLinewidths, 9);
    }

    [Fact]
    public void LowestAliasLeavesOutTheFlankOfTheCentralPeak()
    {
        // from 20 MHz the margin first rises (the line itself); the plain minimum is that start value (2 linewidths),
        // the lowest alias is the first near-coincidence (5 linewidths at 1.05 GHz)
        Assert.Equal(2.0, AliasMargin.Minimum(AB, 20e6, 5e9).MarginLinewidths, 9);
        Assert.Equal(5.0, AliasMargin.LowestAlias(AB, 20e6, 5e9).MarginLinewidths, 9);
        // a range on the rising flank only: no alias, the value at its end
        var rising = AliasMargin.LowestAlias(AB, 20e6, 0.3e9);
        Assert.Equal(0.3e9, rising.DeltaHz);
        Assert.Equal(30.0, rising.MarginLinewidths, 9);
    }

    [Fact]
    public void FirstBelowFindsTheThresholdCrossingBeforeTheExactRepeat()
    {
        // Up to 11 GHz the lowest value is 5 linewidths (at 1.05 and 9.95 GHz). Approaching 11 GHz = 11·1 GHz = 10·1.1 GHz
        // both misfits are (11 GHz − Δ)/10 MHz, below 3 linewidths from Δ = 10.97 GHz on (hand computed).
        var first = AliasMargin.FirstBelow(AB, 3, 0.1e9, 12e9);
        Assert.NotNull(first);
        Assert.Equal(10.97e9, first!.Value, 0);
        Assert.Null(AliasMargin.FirstBelow(AB, 3, 0.1e9, 10.9e9));
        // at 6 linewidths the near-coincidence at 1.05 GHz (5 linewidths) already counts: the curve crosses 6 at 1.04 GHz
        Assert.Equal(1.04e9, AliasMargin.FirstBelow(AB, 6, 0.1e9, 12e9)!.Value, 0);
    }

    [Fact]
    public void RatioFifteenSixteenthsRepeatsExactlyAfterSixteenFsr()
    {
        // Number theory: FSR₁/FSR₂ = p/q in lowest terms → q·FSR₁ = p·FSR₂ is the first common multiple.
        // Planar spacings 160 mm and 150 mm give FSR₁/FSR₂ = 150/160 = 15/16, so the repeat is 16·FSR₁ = 15·FSR₂.
        var first = Instrument.FromLength("first", 0.160, CavityGeometry.Planar, 150);
        var second = Instrument.FromLength("second", 0.150, CavityGeometry.Planar, 150);
        Instrument[] pair = [first, second];
        var repeat = AliasMargin.FindRepeat(pair, [0, 1e-9], 10_000);
        Assert.NotNull(repeat);
        Assert.Equal(16, repeat!.Multiple);
        Assert.Equal([15L], repeat.OtherMultiples);
        Assert.Equal(16 * first.FsrHz, repeat.RepeatHz, 1e-3);
        Assert.True(AliasMargin.Margin(pair, 16 * first.FsrHz) < 1e-6);

        // the planner reports that range and calls the design an exact alias when the span reaches it
        var within = Planner.Evaluate([new DesignCavity(first), new DesignCavity(second)], new PlanSettings { SpanHz = 20e9 });
        Assert.Equal(DesignVerdict.RepeatsWithinSpan, within.Verdict);
        Assert.Equal(16, within.Repeat!.Multiple);
        Assert.True(within.Robust.MarginLinewidths < 1e-6);
        Assert.Equal(16 * first.FsrHz, within.Robust.DeltaHz, 1.0);
        Assert.True(within.FirstAliasHz < 16 * first.FsrHz);
        Assert.True(double.IsPositiveInfinity(within.RequiredPeakSnr));

        // a span short of 16·FSR₁ = 14.99 GHz: the repeat lies beyond it
        var before = Planner.Evaluate([new DesignCavity(first), new DesignCavity(second)], new PlanSettings { SpanHz = 14e9 });
        Assert.NotEqual(DesignVerdict.RepeatsWithinSpan, before.Verdict);
        Assert.True(before.Robust.MarginLinewidths > 1);
    }

    [Fact]
    public void RepeatSearchHonoursTheTolerance()
    {
        // 100 mm and 93.34 mm: FSR₁/FSR₂ = 0.9334 = 4667/5000 exactly, but 14/15 = 0.93333 lies within 0.07 %
        var first = Instrument.FromLength("first", 0.1, CavityGeometry.Planar, 150);
        var second = Instrument.FromLength("second", 0.09334, CavityGeometry.Planar, 150);
        Assert.Equal(5000, AliasMargin.FindRepeat([first, second], [0, 1e-9], 10_000)!.Multiple);
        Assert.Equal(15, AliasMargin.FindRepeat([first, second], [0, 0.05e-3 / 0.09334], 10_000)!.Multiple);
        Assert.Null(AliasMargin.FindRepeat([first, second], [0, 1e-9], 4999));
    }

    [Fact]
    public void MarginIsLinearBetweenConsecutiveVerticesAndNeverBelowTheMinimum()
    {
        // property: for random designs of two or three cavities, the margin at any Δ equals the straight line
        // between the neighbouring corners, and no sampled Δ beats the exact minimum
        var gen = Gen.Select(Gen.Double[0.5e9, 3e9], Gen.Double[0.5e9, 3e9], Gen.Double[0.5e9, 3e9], Gen.Int[2, 3], Gen.Double[30, 300], Gen.Double[0, 1]);
        gen.Sample((f1, f2, f3, n, finesse, u) =>
        {
            var insts = new List<Instrument> { new("1", f1, finesse), new("2", f2, finesse * 0.7) };
            if (n == 3) insts.Add(new("3", f3, finesse * 1.3));
            var from = 0.05e9;
            var to = 15e9;
            var v = AliasMargin.Vertices(insts, from, to);
            var d = from + u * (to - from);
            var i = 0;
            while (i + 1 < v.Count && v[i + 1].DeltaHz < d) i++;
            var (a, b) = (v[i], v[Math.Min(i + 1, v.Count - 1)]);
            var t = b.DeltaHz > a.DeltaHz ? (d - a.DeltaHz) / (b.DeltaHz - a.DeltaHz) : 0;
            var interpolated = a.MarginLinewidths + t * (b.MarginLinewidths - a.MarginLinewidths);
            var exact = AliasMargin.Margin(insts, d);
            var min = AliasMargin.Minimum(insts, from, to);
            return Math.Abs(interpolated - exact) <= 1e-6 * Math.Max(1, exact) && exact >= min.MarginLinewidths - 1e-9;
        }, iter: 300);
    }

    [Fact]
    public void AliasesOfATwoToThreeDesignSitAtTheCommonMultiples()
    {
        // 100 mm and 150 mm planar: FSR₁/FSR₂ = 3/2, so every 2·FSR₁ = 3·FSR₂ is an exact alias
        var first = Instrument.FromLength("first", 0.1, CavityGeometry.Planar, 150);
        var second = Instrument.FromLength("second", 0.15, CavityGeometry.Planar, 150);
        var aliases = AliasMargin.Aliases([first, second], 3, 0.05e9, 10e9);
        Assert.Equal(3, aliases.Count);
        for (var k = 0; k < aliases.Count; k++)
        {
            Assert.Equal(2 * (k + 1) * first.FsrHz, aliases[k].DeltaHz, 1.0);
            Assert.True(aliases[k].MarginLinewidths < 1e-6);
        }
    }
}
