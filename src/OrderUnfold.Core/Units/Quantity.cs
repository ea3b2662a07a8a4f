using System.Globalization;
using System.Text.RegularExpressions;

namespace OrderUnfold.Units;

/// <summary>The physical dimension of a quantity written with a unit.</summary>
public enum Dimension
{
    /// <summary>A frequency, Hz.</summary>
    Frequency,
    /// <summary>A length, m.</summary>
    Length,
    /// <summary>A time, s.</summary>
    Time,
    /// <summary>A voltage, V.</summary>
    Voltage,
    /// <summary>A power ratio in decibels, dB.</summary>
    Decibel,
}

/// <summary>
/// Parses and formats quantities with units ("1.5 GHz", "50 mm", "632.8 nm", "2 ns", "30 dB").
/// Values are returned in SI base units (Hz, m, s, V; dB stays dB). A bare number is an error that lists
/// the accepted units: nothing here guesses a unit.
/// </summary>
public static partial class Quantity
{
    private static readonly Dictionary<Dimension, (string Unit, double Factor)[]> Units = new()
    {
        [Dimension.Frequency] = [("Hz", 1), ("kHz", 1e3), ("MHz", 1e6), ("GHz", 1e9), ("THz", 1e12)],
        [Dimension.Length] = [("m", 1), ("cm", 1e-2), ("mm", 1e-3), ("um", 1e-6), ("µm", 1e-6), ("nm", 1e-9), ("pm", 1e-12)],
        [Dimension.Time] = [("s", 1), ("ms", 1e-3), ("us", 1e-6), ("µs", 1e-6), ("ns", 1e-9), ("ps", 1e-12)],
        [Dimension.Voltage] = [("V", 1), ("mV", 1e-3), ("kV", 1e3)],
        [Dimension.Decibel] = [("dB", 1)],
    };

    [GeneratedRegex(@"^\s*(?<num>[+-]?([0-9]+(\.[0-9]*)?|\.[0-9]+)([eE][+-]?[0-9]+)?)\s*(?<unit>[A-Za-zµ]*)\s*$")]
    private static partial Regex Pattern();

    /// <summary>The units accepted for a dimension, as written in messages ("Hz, kHz, MHz, GHz, THz").</summary>
    public static string AcceptedUnits(Dimension dimension) =>
        string.Join(", ", Units[dimension].Select(u => u.Unit).Where(u => u != "µm" && u != "µs"));

    /// <summary>Parses text such as "1.5 GHz" into SI units; throws <see cref="InputException"/> naming what was expected.</summary>
    public static double Parse(string text, Dimension dimension, string what = "value")
    {
        if (TryParse(text, dimension, out var value, out var error)) return value;
        throw new InputException($"{what}: {error}");
    }

    /// <summary>Non-throwing form of <see cref="Parse"/>.</summary>
    public static bool TryParse(string? text, Dimension dimension, out double value, out string error)
    {
        value = double.NaN;
        error = "";
        var accepted = AcceptedUnits(dimension);
        if (string.IsNullOrWhiteSpace(text))
        {
            error = $"expected a {Describe(dimension)} with a unit ({accepted}) but got nothing";
            return false;
        }

        var m = Pattern().Match(text);
        if (!m.Success)
        {
            error = $"expected a {Describe(dimension)} such as \"{Example(dimension)}\" (units: {accepted}) but got \"{text}\"";
            return false;
        }

        var unit = m.Groups["unit"].Value;
        if (unit.Length == 0)
        {
            error = $"\"{text}\" has no unit; a {Describe(dimension)} needs one of {accepted}";
            return false;
        }

        var match = Units[dimension].Where(u => u.Unit == unit).ToArray();
        if (match.Length == 0)
        {
            // Allow case-insensitive match only when it is unambiguous (e.g. "ghz"), never for m vs M.
            match = Units[dimension].Where(u => string.Equals(u.Unit, unit, StringComparison.OrdinalIgnoreCase)).ToArray();
            if (match.Length != 1 || unit.Equals("M", StringComparison.Ordinal))
            {
                error = $"unknown unit \"{unit}\" in \"{text}\"; a {Describe(dimension)} needs one of {accepted}";
                return false;
            }
        }

        var number = double.Parse(m.Groups["num"].Value, NumberStyles.Float, CultureInfo.InvariantCulture);
        value = number * match[0].Factor;
        if (!double.IsFinite(value))
        {
            error = $"\"{text}\" is not a finite {Describe(dimension)}";
            return false;
        }

        return true;
    }

    /// <summary>Formats a frequency in Hz with a readable unit: "1.500 GHz", "-12.3 MHz".</summary>
    public static string FormatFrequency(double hz, int significant = 4)
    {
        if (!double.IsFinite(hz)) return "n/a";
        var a = Math.Abs(hz);
        var (factor, unit) = a >= 1e12 ? (1e12, "THz") : a >= 1e9 ? (1e9, "GHz") : a >= 1e6 ? (1e6, "MHz") : a >= 1e3 ? (1e3, "kHz") : (1.0, "Hz");
        return FormatScaled(hz / factor, significant) + " " + unit;
    }

    /// <summary>Formats a length in m with a readable unit: "50.00 mm".</summary>
    public static string FormatLength(double m, int significant = 4)
    {
        if (!double.IsFinite(m)) return "n/a";
        var a = Math.Abs(m);
        var (factor, unit) = a >= 1 ? (1.0, "m") : a >= 1e-3 ? (1e-3, "mm") : a >= 1e-6 ? (1e-6, "µm") : (1e-9, "nm");
        return FormatScaled(m / factor, significant) + " " + unit;
    }

    private static string FormatScaled(double v, int significant)
    {
        if (v == 0) return "0";
        var digits = Math.Max(0, significant - 1 - (int)Math.Floor(Math.Log10(Math.Abs(v))));
        return v.ToString("F" + Math.Min(digits, 12), CultureInfo.InvariantCulture);
    }

    private static string Describe(Dimension d) => d switch
    {
        Dimension.Frequency => "frequency",
        Dimension.Length => "length",
        Dimension.Time => "time",
        Dimension.Voltage => "voltage",
        _ => "level in dB",
    };

    /// <summary>A value of dimension <paramref name="d"/> written with its unit, for messages ("1.5 GHz", "50 mm").</summary>
    public static string Example(Dimension d) => d switch
    {
        Dimension.Frequency => "1.5 GHz",
        Dimension.Length => "50 mm",
        Dimension.Time => "2 ns",
        Dimension.Voltage => "10 V",
        _ => "30 dB",
    };
}
