using Xunit;

namespace OrderUnfold.Tests.Numerics;

/// <summary>The two median conventions (values worked out by hand).</summary>
public class MediansTests
{
    [Fact]
    public void OddAndEvenCounts()
    {
        Assert.Equal(2, Medians.OfFinite([3, 1, 2]));
        Assert.Equal(2.5, Medians.OfFinite([4, 1, 3, 2])); // mean of the two middle values
        Assert.Equal(3, Medians.Upper([4, 1, 3, 2]));      // the value at index n/2 of the sorted values
        Assert.Equal(2, Medians.Upper([3, 1, 2]));
    }

    [Fact]
    public void NonFiniteValuesAreLeftOutAndNoneGiveNaN()
    {
        Assert.Equal(2, Medians.OfFinite([double.NaN, 1, 2, 3, double.PositiveInfinity]));
        Assert.Equal(3, Medians.UpperOfFinite([double.NaN, 4, 1, 3, 2]));
        Assert.True(double.IsNaN(Medians.OfFinite([double.NaN])));
        Assert.True(double.IsNaN(Medians.Upper([])));
    }
}
