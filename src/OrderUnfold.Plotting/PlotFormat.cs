using System.Globalization;

namespace OrderUnfold.Plotting;

/// <summary>Number formats shared by the figures' titles and labels.</summary>
internal static class PlotFormat
{
    /// <summary>A frequency in THz with as many decimals as <paramref name="resolutionHz"/> needs, trailing zeros dropped.</summary>
    public static string Terahertz(double hz, double resolutionHz)
    {
        var decimals = (int)Math.Clamp(Math.Ceiling(-Math.Log10(resolutionHz / 1e12) - 1e-9), 0, 12);
        var text = (hz / 1e12).ToString("F" + decimals, CultureInfo.InvariantCulture);
        if (text.Contains('.')) text = text.TrimEnd('0').TrimEnd('.');
        return text + " THz";
    }

    /// <summary>"152.3 ± 1.2": the value rounded to the second significant digit of its uncertainty.</summary>
    public static string WithSigma(double value, double? sigma)
    {
        if (!double.IsFinite(value)) return "n/a";
        if (sigma is not { } s || !double.IsFinite(s) || s <= 0)
            return value.ToString("G4", CultureInfo.InvariantCulture);
        var decimals = (int)Math.Clamp(1 - Math.Floor(Math.Log10(s)), 0, 10);
        var format = "F" + decimals;
        return $"{value.ToString(format, CultureInfo.InvariantCulture)} ± {s.ToString(format, CultureInfo.InvariantCulture)}";
    }

    /// <summary>"1 line", "3 lines": a count with its noun, plural when the count is not 1.</summary>
    public static string Count(int count, string noun) => $"{count} {noun}{(count == 1 ? "" : "s")}";
}
