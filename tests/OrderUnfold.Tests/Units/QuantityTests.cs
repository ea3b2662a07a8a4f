using OrderUnfold.Units;
using Xunit;

namespace OrderUnfold.Tests.Units;

/// <summary>Parsing and formatting of quantities with units (SI prefixes as defined in the BIPM SI Brochure, 9th ed.).</summary>
public class QuantityTests
{
    [Theory]
    [InlineData("1 Hz", 1.0)]
    [InlineData("2.5 kHz", 2.5e3)]
    [InlineData("150 MHz", 150e6)]
    [InlineData("1.5 GHz", 1.5e9)]
    [InlineData("281.627 THz", 281.627e12)]
    [InlineData("-12.3 MHz", -12.3e6)]
    [InlineData("1.5GHz", 1.5e9)]
    [InlineData("  3e2 MHz  ", 300e6)]
    [InlineData(".5 GHz", 0.5e9)]
    [InlineData("+2 kHz", 2e3)]
    [InlineData("1.5 ghz", 1.5e9)] // unambiguous case-insensitive match
    public void ParsesFrequencies(string text, double hz) => AssertParses(text, Dimension.Frequency, hz);

    [Theory]
    [InlineData("1 m", 1.0)]
    [InlineData("10 cm", 0.1)]
    [InlineData("50 mm", 0.05)]
    [InlineData("93.7 mm", 0.0937)]
    [InlineData("3 um", 3e-6)]
    [InlineData("3 µm", 3e-6)]
    [InlineData("632.8 nm", 632.8e-9)]
    [InlineData("1064.5 nm", 1064.5e-9)]
    [InlineData("40 pm", 40e-12)]
    public void ParsesLengths(string text, double m) => AssertParses(text, Dimension.Length, m);

    [Theory]
    [InlineData("1 s", 1.0)]
    [InlineData("20 ms", 20e-3)]
    [InlineData("5 us", 5e-6)]
    [InlineData("5 µs", 5e-6)]
    [InlineData("2 ns", 2e-9)]
    [InlineData("7 ps", 7e-12)]
    public void ParsesTimes(string text, double s) => AssertParses(text, Dimension.Time, s);

    [Theory]
    [InlineData("10 V", 10.0)]
    [InlineData("250 mV", 0.25)]
    [InlineData("1.2 kV", 1200.0)]
    public void ParsesVoltages(string text, double v) => AssertParses(text, Dimension.Voltage, v);

    [Theory]
    [InlineData("30 dB", 30.0)]
    [InlineData("-3 dB", -3.0)]
    public void ParsesDecibels(string text, double db) => AssertParses(text, Dimension.Decibel, db);

    private static void AssertParses(string text, Dimension d, double expected)
    {
        var v = Quantity.Parse(text, d);
        Assert.Equal(expected, v, Math.Abs(expected) * 1e-15);
        Assert.True(Quantity.TryParse(text, d, out var w, out var error));
        Assert.Equal(v, w);
        Assert.Equal("", error);
    }

    [Theory]
    [InlineData("\u0967\u0966\u0966 mm")] // Devanagari digits: a regex \d matches them, double.Parse does not (found by the fuzz run)
    [InlineData("\u0661.5 GHz")] // an Arabic-Indic one
    [InlineData("1\uFF10 mm")] // a fullwidth zero
    public void DigitsOtherThanAsciiAreRefusedNotCrashed(string text)
    {
        var e = Assert.Throws<InputException>(() => Quantity.Parse(text, text.EndsWith("GHz", StringComparison.Ordinal) ? Dimension.Frequency : Dimension.Length, "cavity length"));
        Assert.StartsWith("cavity length: ", e.Message);
        Assert.False(Quantity.TryParse(text, Dimension.Length, out _, out _));
    }

    [Theory]
    [InlineData("1.5", Dimension.Frequency, "Hz, kHz, MHz, GHz, THz")]
    [InlineData("50", Dimension.Length, "m, cm, mm, um, nm, pm")]
    [InlineData("2", Dimension.Time, "s, ms, us, ns, ps")]
    [InlineData("10", Dimension.Voltage, "V, mV, kV")]
    [InlineData("30", Dimension.Decibel, "dB")]
    public void BareNumberIsAnErrorListingTheUnits(string text, Dimension d, string units)
    {
        var e = Assert.Throws<InputException>(() => Quantity.Parse(text, d, "cavity length"));
        Assert.Contains("has no unit", e.Message);
        Assert.Contains(units, e.Message);
        Assert.Contains($"\"{text}\"", e.Message);
        Assert.StartsWith("cavity length: ", e.Message);
        Assert.False(Quantity.TryParse(text, d, out var v, out var error));
        Assert.True(double.IsNaN(v));
        Assert.Contains(units, error);
    }

    [Theory]
    [InlineData("5 furlong", Dimension.Length, "furlong")]
    [InlineData("5 mm", Dimension.Frequency, "mm")]   // a length unit where a frequency is needed
    [InlineData("1 GHz", Dimension.Length, "GHz")]
    [InlineData("5 M", Dimension.Length, "M")]        // never read M as m
    [InlineData("2 Mhz", Dimension.Length, "Mhz")]
    [InlineData("3 dBm", Dimension.Decibel, "dBm")]
    public void UnknownUnitIsAnErrorNamingIt(string text, Dimension d, string unit)
    {
        Assert.False(Quantity.TryParse(text, d, out _, out var error));
        Assert.Contains($"unknown unit \"{unit}\"", error);
        Assert.Contains(Quantity.AcceptedUnits(d), error);
        Assert.Throws<InputException>(() => Quantity.Parse(text, d));
    }

    [Theory]
    [InlineData(null)]
    [InlineData("")]
    [InlineData("   ")]
    public void NothingIsAnError(string? text)
    {
        Assert.False(Quantity.TryParse(text, Dimension.Frequency, out _, out var error));
        Assert.Contains("got nothing", error);
    }

    [Theory]
    [InlineData("abc GHz")]
    [InlineData("1.5 GHz extra")]
    [InlineData("1,5 GHz")]
    [InlineData("GHz")]
    [InlineData("1.2.3 GHz")]
    public void MalformedTextIsAnErrorWithAnExample(string text)
    {
        Assert.False(Quantity.TryParse(text, Dimension.Frequency, out _, out var error));
        Assert.Contains("1.5 GHz", error); // the example given in the message
        Assert.Contains(text, error);
    }

    [Fact]
    public void OverflowIsNotAFiniteQuantity()
    {
        Assert.False(Quantity.TryParse("1e308 THz", Dimension.Frequency, out _, out var error));
        Assert.Contains("not a finite", error);
    }

    [Theory]
    [InlineData(1.5e9, 4, "1.500 GHz")]
    [InlineData(-12.3e6, 3, "-12.3 MHz")]
    [InlineData(281.627e12, 6, "281.627 THz")]
    [InlineData(2.5e3, 4, "2.500 kHz")]
    [InlineData(12.0, 4, "12.00 Hz")]
    [InlineData(0.0, 4, "0 Hz")]
    [InlineData(999.9e6, 4, "999.9 MHz")]
    public void FormatsFrequencies(double hz, int digits, string expected) =>
        Assert.Equal(expected, Quantity.FormatFrequency(hz, digits));

    [Theory]
    [InlineData(0.05, "50.00 mm")]
    [InlineData(1.25, "1.250 m")]
    [InlineData(632.8e-9, "632.8 nm")]
    [InlineData(3e-6, "3.000 µm")]
    public void FormatsLengths(double m, string expected) => Assert.Equal(expected, Quantity.FormatLength(m));

    [Fact]
    public void NonFiniteValuesFormatAsNotAvailable()
    {
        Assert.Equal("n/a", Quantity.FormatFrequency(double.NaN));
        Assert.Equal("n/a", Quantity.FormatFrequency(double.PositiveInfinity));
        Assert.Equal("n/a", Quantity.FormatLength(double.NaN));
    }

    [Fact]
    public void FormattedFrequenciesParseBackWithinTheirPrecision()
    {
        var rng = new Random(5);
        for (var i = 0; i < 500; i++)
        {
            var hz = Math.Pow(10, rng.NextDouble() * 13) * (rng.Next(2) == 0 ? -1 : 1);
            var text = Quantity.FormatFrequency(hz, 7);
            var back = Quantity.Parse(text, Dimension.Frequency);
            Assert.True(Math.Abs(back / hz - 1) < 1e-6, $"{hz} → \"{text}\" → {back}");
        }
    }

    [Fact]
    public void FormattingIgnoresTheCurrentCulture()
    {
        var saved = System.Globalization.CultureInfo.CurrentCulture;
        try
        {
            // a culture with a decimal comma (built from the invariant one: the test host may run globalization-invariant)
            var comma = (System.Globalization.CultureInfo)System.Globalization.CultureInfo.InvariantCulture.Clone();
            comma.NumberFormat.NumberDecimalSeparator = ",";
            comma.NumberFormat.NumberGroupSeparator = ".";
            System.Globalization.CultureInfo.CurrentCulture = comma;
            Assert.Equal("1,5", 1.5.ToString(System.Globalization.CultureInfo.CurrentCulture)); // the culture does bite
            Assert.Equal("1.500 GHz", Quantity.FormatFrequency(1.5e9));
            Assert.Equal(1.5e9, Quantity.Parse("1.5 GHz", Dimension.Frequency));
        }
        finally
        {
            System.Globalization.CultureInfo.CurrentCulture = saved;
        }
    }
}
