using OrderUnfold.Analysis.Modes;
using Xunit;

namespace OrderUnfold.Tests.Analysis.Modes;

/// <summary>Positions modulo a folding period, as the comb search and the comb fit use them.</summary>
public sealed class FoldArithmeticTests
{
    [Theory]
    [InlineData(0.5, 2.0, 0.5)]
    [InlineData(-0.5, 2.0, 1.5)]
    [InlineData(4.0, 2.0, 0.0)]
    [InlineData(-4.5, 2.0, 1.5)]
    public void Mod_IsInZeroToPeriod(double x, double m, double expected) => Assert.Equal(expected, FoldArithmetic.Mod(x, m), 12);

    [Theory]
    [InlineData(1.6, 2.0, -0.4)]
    [InlineData(0.4, 2.0, 0.4)]
    [InlineData(-1.6, 2.0, 0.4)]
    [InlineData(5.9, 2.0, -0.1)]
    public void WrapTo_IsTheNearestDifferenceModuloThePeriod(double d, double f, double expected) =>
        Assert.Equal(expected, FoldArithmetic.WrapTo(d, f), 12);

    [Fact]
    public void WrapTo_WithoutFolding_LeavesTheDifference() => Assert.Equal(123.4, FoldArithmetic.WrapTo(123.4, null));
}
