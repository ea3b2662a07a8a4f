using OrderUnfold.Instruments;
using OrderUnfold.Units;
using Xunit;

namespace OrderUnfold.Tests.Instruments;

/// <summary>
/// Cavity geometry. Speed of light c = 299 792 458 m/s exactly (BIPM, <i>The International System of Units</i>,
/// SI Brochure, 9th ed., 2019: the metre is defined by fixing c). FSR formulas: planar c/(2nL), confocal c/(4nL)
/// (Saleh &amp; Teich, <i>Fundamentals of Photonics</i>; section recalled from memory).
/// </summary>
public class InstrumentTests
{
    [Fact]
    public void SpeedOfLightIsTheExactSiValue()
    {
        Assert.Equal(299_792_458.0, PhysicalConstants.SpeedOfLight); // BIPM SI Brochure, 9th ed., exact
    }

    [Theory]
    // planar, L = 0.1 m: 299 792 458 / 0.2 = 1 498 962 290 Hz exactly
    [InlineData(0.1, CavityGeometry.Planar, 1.0, 1_498_962_290.0)]
    // confocal, L = 0.1 m: 299 792 458 / 0.4 = 749 481 145 Hz exactly
    [InlineData(0.1, CavityGeometry.Confocal, 1.0, 749_481_145.0)]
    // planar, L = 50 mm: 299 792 458 / 0.1 = 2 997 924 580 Hz exactly
    [InlineData(0.05, CavityGeometry.Planar, 1.0, 2_997_924_580.0)]
    // planar, L = 0.1 m, n = 1.5: 299 792 458 / 0.3 = 999 308 193.33... Hz
    [InlineData(0.1, CavityGeometry.Planar, 1.5, 999_308_193.333333)]
    public void FsrFromLength(double lengthM, CavityGeometry geometry, double n, double expectedHz)
    {
        // tolerance: 1e-15 relative (one rounding of a double division) for the exact cases, 1e-9 Hz display rounding otherwise
        var fsr = Instrument.FsrFromLength(lengthM, geometry, n);
        Assert.Equal(expectedHz, fsr, Math.Max(expectedHz * 1e-15, 1e-3));
    }

    [Fact]
    public void PlanarFsrForTenCentimetresIsExactInDoubles()
    {
        // 299 792 458 / 0.2 is exactly representable (1 498 962 290 < 2^53); the division is correctly rounded
        Assert.Equal(1_498_962_290.0, Instrument.FsrFromLength(0.1, CavityGeometry.Planar));
    }

    [Fact]
    public void FromLengthKeepsGeometryAndLinewidthIsFsrOverFinesse()
    {
        var i = Instrument.FromLength("A", 0.1, CavityGeometry.Planar, 150);
        Assert.Equal(0.1, i.LengthM);
        Assert.Equal(CavityGeometry.Planar, i.Geometry);
        Assert.Equal(1_498_962_290.0 / 150, i.LinewidthHz, 1e-6);
        Assert.Equal(1.0, i.Transmission(0));
        Assert.Equal(Airy.Transmission(1e7, i.FsrHz, 150), i.Transmission(1e7));
    }

    [Theory]
    [InlineData(-0.1)]
    [InlineData(0.0)]
    [InlineData(double.NaN)]
    [InlineData(double.PositiveInfinity)]
    public void NonPositiveOrNonFiniteLengthIsAnInputError(double length)
    {
        var e = Assert.Throws<InputException>(() => Instrument.FsrFromLength(length, CavityGeometry.Planar));
        Assert.Contains("length must be positive", e.Message);
        Assert.Throws<InputException>(() => Instrument.FromLength("A", length, CavityGeometry.Confocal, 100));
    }

    [Fact]
    public void RefractiveIndexBelowOneIsAnInputError()
    {
        Assert.Throws<InputException>(() => Instrument.FsrFromLength(0.1, CavityGeometry.Planar, 0.9));
        Assert.Throws<InputException>(() => new Instrument("A", 1e9, 100, refractiveIndex: 0.5));
    }

    [Theory]
    [InlineData(0.5)]
    [InlineData(0.0)]
    [InlineData(-3.0)]
    [InlineData(double.NaN)]
    [InlineData(double.PositiveInfinity)]
    public void FinesseBelowOneIsAnInputError(double finesse)
    {
        var e = Assert.Throws<InputException>(() => new Instrument("A", 1.5e9, finesse));
        Assert.Contains("finesse must be at least 1", e.Message);
        Assert.Contains("'A'", e.Message);
    }

    [Theory]
    [InlineData(0.0)]
    [InlineData(-1e9)]
    [InlineData(double.NaN)]
    public void NonPositiveFsrIsAnInputError(double fsr)
    {
        Assert.Throws<InputException>(() => new Instrument("A", fsr, 100));
    }

    [Fact]
    public void EmptyNameIsAnInputError()
    {
        Assert.Throws<InputException>(() => new Instrument(" ", 1e9, 100));
    }

    [Fact]
    public void FinesseOfExactlyOneIsAccepted()
    {
        var i = new Instrument("broad", 1e9, 1);
        Assert.Equal(1e9, i.LinewidthHz);
    }
}
