using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Planning;
using Xunit;

namespace OrderUnfold.Tests.Planning;

/// <summary>Ranking of candidate cavities. All designs are invented (simulated) cavities.</summary>
public class PlannerTests
{
    private static readonly Instrument First = Instrument.FromLength("first", 0.100, CavityGeometry.Planar, 150);
    private static readonly CavityFamily Planar150 = new(CavityGeometry.Planar, 150);

    [Fact]
    public void RankingPicksALengthAboveTheThresholdWhileSmallIntegerRatiosFail()
    {
        var settings = new PlanSettings { SpanHz = 20e9, ThresholdLinewidths = 3 };
        var range = CandidateLengths.Range(0.080, 0.120, 0.0001);
        // add small-integer ratios to the candidates: 150 mm (FSR ratio 3:2), 50 mm (2:1), 75 mm (4:3)
        var candidates = range.Concat([new CandidateLength(0.150, "2:3 lengths"), new CandidateLength(0.050, "1:2"), new CandidateLength(0.075, "3:4")]).ToList();
        var ranked = Planner.RankAddedCavity([new DesignCavity(First)], candidates, Planar150 with { LengthToleranceM = 0.05e-3 }, settings);

        Assert.Equal(candidates.Count, ranked.Count);
        var best = ranked[0];
        Assert.True(best.Passes);
        Assert.True(best.Robust.MarginLinewidths >= 3, $"best margin {best.Robust.MarginLinewidths}");
        // the best is sorted first: nothing else is better
        Assert.All(ranked, d => Assert.True(d.Robust.MarginLinewidths <= best.Robust.MarginLinewidths + 1e-6));
        // and the worst alias of the best design, checked directly on its curve, holds over the whole span
        var check = AliasMargin.Minimum(best.Instruments, 1.0e9, 20e9);
        Assert.True(check.MarginLinewidths >= best.Nominal.MarginLinewidths - 1e-9);

        foreach (var label in new[] { "2:3 lengths", "1:2", "3:4" })
        {
            var bad = ranked.Single(d => d.Added[0].Label == label);
            Assert.Equal(DesignVerdict.RepeatsWithinSpan, bad.Verdict);
            Assert.True(bad.Robust.MarginLinewidths < 1e-3);
        }

        // FSR₁/FSR₂ = L₂/L₁ = p/q in lowest terms → repeat at q·FSR₁: 150 mm (3/2) and 50 mm (1/2) at 2·FSR₁, 75 mm (3/4) at 4·FSR₁
        Assert.Equal(2, ranked.Single(d => d.Added[0].Label == "2:3 lengths").Repeat!.Multiple);
        Assert.Equal(4, ranked.Single(d => d.Added[0].Label == "3:4").Repeat!.Multiple);
        Assert.Equal(2, ranked.Single(d => d.Added[0].Label == "1:2").Repeat!.Multiple);
    }

    [Fact]
    public void ToleranceNeverImprovesTheMarginAndItsSamplingBoundHolds()
    {
        var settings = new PlanSettings { SpanHz = 20e9 };
        var candidates = CandidateLengths.Range(0.090, 0.096, 0.0005);
        var tol = 0.05e-3;
        var exact = Planner.RankAddedCavity([new DesignCavity(First)], candidates, Planar150, settings);
        var toleranced = Planner.RankAddedCavity([new DesignCavity(First)], candidates, Planar150 with { LengthToleranceM = tol }, settings);
        var worse = 0;
        foreach (var t in toleranced)
        {
            var length = t.Added[0].Instrument.LengthM!.Value;
            var e = exact.Single(d => d.Added[0].Instrument.LengthM == length);
            Assert.Equal(e.Nominal.MarginLinewidths, t.Nominal.MarginLinewidths, 12);
            Assert.Equal(e.Robust.MarginLinewidths, e.Nominal.MarginLinewidths, 12); // no tolerance: robust = nominal
            Assert.True(t.Robust.MarginLinewidths <= t.Nominal.MarginLinewidths + 1e-12);
            if (t.Robust.MarginLinewidths < t.Nominal.MarginLinewidths - 1e-6) worse++;

            // brute force: 201 lengths across the band; none may fall below the sampled worst by more than the stated bound
            var dense = Enumerable.Range(0, 201).Min(j =>
            {
                var l = length - tol + 2 * tol * j / 200;
                Instrument[] pair = [First, Instrument.FromLength("x", l, CavityGeometry.Planar, 150)];
                var (from, to) = Planner.Range(pair, settings);
                return AliasMargin.LowestAlias(pair, from, to).MarginLinewidths;
            });
            Assert.True(dense >= t.Robust.MarginLinewidths - t.SamplingErrorBoundLinewidths - 1e-9,
                $"{length}: dense worst {dense}, sampled {t.Robust.MarginLinewidths}, bound {t.SamplingErrorBoundLinewidths}");
            Assert.True(dense <= t.Robust.MarginLinewidths + 1e-9);
        }

        Assert.True(worse > 0, "the tolerance should make at least one candidate strictly worse");
    }

    [Fact]
    public void TiesGoToTheShorterCavity()
    {
        // confocal 50 mm and planar 100 mm have the same FSR, hence identical margins: the shorter comes first
        var settings = new PlanSettings { SpanHz = 10e9 };
        var planar = Planner.Evaluate([new DesignCavity(First), new DesignCavity(Instrument.FromLength("p", 0.0934, CavityGeometry.Planar, 150))], settings);
        var confocal = Planner.Evaluate([new DesignCavity(First), new DesignCavity(Instrument.FromLength("c", 0.0467, CavityGeometry.Confocal, 150))], settings);
        Assert.Equal(planar.Robust.MarginLinewidths, confocal.Robust.MarginLinewidths, 9);
        var ranked = Planner.Rank([planar, confocal]);
        Assert.Same(confocal, ranked[0]);
        ranked = Planner.Rank([confocal, planar]);
        Assert.Same(confocal, ranked[0]);
    }

    [Fact]
    public void AThirdCavityCoversASpanNoPairCan()
    {
        // finesse 50 over 100 GHz: roughly (range) × (smallest gap) ≈ FSR₁·FSR₂, so two cavities of ~1.5 GHz leave gaps
        // of ~20 MHz against linewidths of ~30 MHz, far below 3 linewidths
        var first = Instrument.FromLength("first", 0.100, CavityGeometry.Planar, 50);
        var family = new CavityFamily(CavityGeometry.Planar, 50);
        var settings = new PlanSettings { SpanHz = 100e9 };
        var candidates = CandidateLengths.Range(0.060, 0.140, 0.001);
        var pairs = Planner.RankAddedCavity([new DesignCavity(first)], candidates, family, settings);
        Assert.False(pairs[0].Passes);
        var triples = Planner.RankThirdCavity(pairs.Take(5).ToList(), candidates, family, settings, keep: 5);
        Assert.Equal(5, triples.Count);
        Assert.All(triples, t => Assert.Equal(3, t.Cavities.Count));
        Assert.True(triples[0].Passes, $"best triple margin {triples[0].Robust.MarginLinewidths}");
        Assert.True(triples[0].Robust.MarginLinewidths > pairs[0].Robust.MarginLinewidths);
        for (var i = 1; i < triples.Count; i++) Assert.True(triples[i].Robust.MarginLinewidths <= triples[i - 1].Robust.MarginLinewidths + 1e-6);

        // the pruned search keeps the same best design as evaluating every triple of the first pair
        var full = Planner.Rank(candidates.Select(c => Planner.Evaluate([.. pairs[0].Cavities, family.Make("third", c)], settings)));
        var prunedFromFirstPair = Planner.RankThirdCavity([pairs[0]], candidates, family, settings, keep: 3);
        Assert.Equal(full[0].Robust.MarginLinewidths, prunedFromFirstPair[0].Robust.MarginLinewidths, 9);
        Assert.Equal(full[0].Added[^1].Instrument.LengthM, prunedFromFirstPair[0].Added[^1].Instrument.LengthM);
    }

    [Fact]
    public void CatalogueLinesAreParsedAndBadLinesPointAtTheirPlace()
    {
        var list = CandidateCatalogue.ParseCatalogue("# spacers in stock\n93.7 mm, B-12\n\n  0.1071 m  # long one\n", "stock.txt");
        Assert.Equal(2, list.Count);
        Assert.Equal(0.0937, list[0].LengthM, 12);
        Assert.Equal("B-12", list[0].Label);
        Assert.Equal(0.1071, list[1].LengthM, 12);
        Assert.Null(list[1].Label);

        var e = Assert.Throws<InputException>(() => CandidateCatalogue.ParseCatalogue("93.7 mm\n  93.7, B-13\n", "stock.txt"));
        Assert.Equal("stock.txt", e.File);
        Assert.Equal(2, e.Line);
        Assert.Equal(3, e.Column);
        Assert.Contains("no unit", e.Message);
        Assert.Throws<InputException>(() => CandidateCatalogue.ParseCatalogue("# nothing\n", "empty.txt"));
        Assert.Throws<InputException>(() => CandidateLengths.Range(0.1, 0.08, 0.001));
    }

    [Fact]
    public void BadSettingsAndToleranceOnAnFsrOnlyCavityAreInputErrors()
    {
        Assert.Throws<InputException>(() => new PlanSettings { SpanHz = -1 }.Validate());
        Assert.Throws<InputException>(() => new PlanSettings { SpanHz = 1e9, ThresholdLinewidths = 0 }.Validate());
        var fsrOnly = new DesignCavity(new Instrument("f", 1.6e9, 150), 0.05e-3);
        var e = Assert.Throws<InputException>(() => Planner.Evaluate([new DesignCavity(First), fsrOnly], new PlanSettings { SpanHz = 10e9 }));
        Assert.Contains("FSR", e.Message);
        // a span inside the line itself
        Assert.Throws<InputException>(() => Planner.Evaluate([new DesignCavity(First), new DesignCavity(new Instrument("g", 1.6e9, 150))], new PlanSettings { SpanHz = 10e6 }));
    }
}
