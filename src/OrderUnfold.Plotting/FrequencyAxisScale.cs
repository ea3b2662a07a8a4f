using System.Globalization;

namespace OrderUnfold.Plotting;

/// <summary>
/// The unit a frequency axis is drawn in: values are divided by <see cref="HertzPerUnit"/> before plotting
/// and the axis title names <see cref="Unit"/>. Shared by all plots so they pick units the same way.
/// </summary>
/// <param name="HertzPerUnit">Hz in one display unit (1e9 for GHz).</param>
/// <param name="Unit">The unit symbol shown in axis titles ("GHz").</param>
public readonly record struct FrequencyAxisScale(double HertzPerUnit, string Unit)
{
    /// <summary>Spans at or above this (in Hz) are drawn in GHz, narrower ones in MHz.</summary>
    public const double GigahertzThresholdHz = 2e9;

    /// <summary>Axis in GHz.</summary>
    public static FrequencyAxisScale Gigahertz { get; } = new(1e9, "GHz");

    /// <summary>Axis in MHz.</summary>
    public static FrequencyAxisScale Megahertz { get; } = new(1e6, "MHz");

    /// <summary>The unit for an axis spanning <paramref name="spanHz"/>: GHz when the span is at least
    /// 2 GHz, MHz otherwise (a non-finite span falls back to MHz).</summary>
    public static FrequencyAxisScale For(double spanHz) =>
        double.IsFinite(spanHz) && Math.Abs(spanHz) >= GigahertzThresholdHz ? Gigahertz : Megahertz;

    /// <summary>The unit for an axis covering the finite values of <paramref name="valuesHz"/>.</summary>
    public static FrequencyAxisScale ForValues(IEnumerable<double> valuesHz) => For(SpanHz(valuesHz));

    /// <summary>A frequency in Hz expressed in this unit.</summary>
    public double FromHertz(double hz) => hz / HertzPerUnit;

    /// <summary>An axis title with the unit in brackets: <c>"scan frequency shift (GHz)"</c>.</summary>
    public string Title(string quantity) => $"{quantity} ({Unit})";

    /// <summary>
    /// A .NET number format for tick labels on an axis spanning <paramref name="spanHz"/>: enough decimals
    /// to tell ticks about a tenth of the span apart, trailing zeros dropped (e.g. <c>"0.##"</c>).
    /// </summary>
    public string TickFormat(double spanHz)
    {
        var span = Math.Abs(FromHertz(spanHz));
        if (!double.IsFinite(span) || span <= 0) return "0.###";
        var decimals = (int)Math.Clamp(Math.Ceiling(-Math.Log10(span / 10)) + 1, 0, 6);
        return decimals == 0 ? "0" : "0." + new string('#', decimals);
    }

    /// <summary>max − min over the finite values (0 when fewer than two).</summary>
    public static double SpanHz(IEnumerable<double> valuesHz)
    {
        double lo = double.PositiveInfinity, hi = double.NegativeInfinity;
        foreach (var v in valuesHz)
        {
            if (!double.IsFinite(v)) continue;
            if (v < lo) lo = v;
            if (v > hi) hi = v;
        }

        return hi >= lo ? hi - lo : 0;
    }

    /// <summary>The unit symbol with its scale, for messages: "GHz (1e9 Hz)".</summary>
    public override string ToString() => $"{Unit} ({HertzPerUnit.ToString("0e0", CultureInfo.InvariantCulture)} Hz)";
}
