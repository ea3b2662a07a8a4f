namespace OrderUnfold.Plotting;

/// <summary>Checks of the arrays a figure is given: a missing array, too few samples or mismatched lengths throw
/// <see cref="ArgumentException"/> naming the array.</summary>
internal static class PlotInputChecks
{
    public static void RequireSamples(string name, double[]? values, int minimum)
    {
        if (values is null)
            throw new ArgumentException($"{name} is missing", name);
        if (values.Length < minimum)
            throw new ArgumentException($"{name} needs at least {minimum} sample{(minimum == 1 ? "" : "s")} but got {values.Length}", name);
    }

    public static void RequireSameLength(string name, double[] reference, string otherName, double[]? other)
    {
        if (other is null)
            throw new ArgumentException($"{otherName} is missing", otherName);
        if (other.Length != reference.Length)
            throw new ArgumentException($"{otherName} must have as many samples as {name} ({reference.Length}) but has {other.Length}", otherName);
    }

    /// <summary>The first finite value of a frequency axis.</summary>
    public static double FirstFinite(double[] values)
    {
        foreach (var v in values)
            if (double.IsFinite(v)) return v;
        throw new ArgumentException("the scan frequency axis has no finite value", nameof(values));
    }
}
