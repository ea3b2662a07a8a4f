using OrderUnfold.Instruments;
using Xunit;

namespace OrderUnfold.Tests.Instruments;

/// <summary>The one table of cavity-geometry names.</summary>
public class CavityGeometryNamesTests
{
    [Fact]
    public void EveryGeometryHasANameThatReadsBack()
    {
        foreach (var geometry in Enum.GetValues<CavityGeometry>())
        {
            var name = CavityGeometryNames.NameOf(geometry);
            Assert.True(CavityGeometryNames.TryParse(name, out var back), name);
            Assert.Equal(geometry, back);
            Assert.True(CavityGeometryNames.TryParse($" {name.ToUpperInvariant()} ", out back));
            Assert.Equal(geometry, back);
        }
    }

    [Fact]
    public void OtherNamesAreRefused()
    {
        Assert.False(CavityGeometryNames.TryParse("concentric", out _));
        Assert.False(CavityGeometryNames.TryParse(null, out _));
        Assert.Equal("planar or confocal", CavityGeometryNames.Choices);
    }
}
