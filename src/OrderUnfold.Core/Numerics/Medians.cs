using MathNet.Numerics.Statistics;

namespace OrderUnfold.Numerics;

/// <summary>Medians through MathNet.Numerics.Statistics, in the two conventions the code uses.</summary>
public static class Medians
{
    /// <summary>Median of the finite values (MathNet <c>Statistics.Median</c>: the mean of the two middle values for an even
    /// count); NaN when there are none.</summary>
    public static double OfFinite(IEnumerable<double> values)
    {
        var finite = values.Where(double.IsFinite).ToArray();
        return finite.Length == 0 ? double.NaN : finite.Median();
    }

    /// <summary>The upper median: the value at index n/2 of the sorted values (MathNet order statistic n/2 + 1), always
    /// one of the values; NaN when there are none.</summary>
    public static double Upper(IEnumerable<double> values)
    {
        var all = values.ToArray();
        return all.Length == 0 ? double.NaN : ArrayStatistics.OrderStatisticInplace(all, all.Length / 2 + 1);
    }

    /// <summary><see cref="Upper"/> of the finite values.</summary>
    public static double UpperOfFinite(IEnumerable<double> values) => Upper(values.Where(double.IsFinite));
}
