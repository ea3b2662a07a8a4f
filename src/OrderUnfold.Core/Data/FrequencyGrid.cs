namespace OrderUnfold.Data;

/// <summary>Uniform frequency grid: bin j is at StartHz + j·StepHz (relative frequencies, Hz).</summary>
public sealed record FrequencyGrid
{
    /// <summary>A grid of <paramref name="count"/> bins from <paramref name="startHz"/> in steps of <paramref name="stepHz"/> (positive), Hz.</summary>
    public FrequencyGrid(double startHz, double stepHz, int count)
    {
        if (!(stepHz > 0)) throw new ArgumentOutOfRangeException(nameof(stepHz), stepHz, "grid step must be positive");
        if (count < 1) throw new ArgumentOutOfRangeException(nameof(count), count, "grid needs at least one bin");
        StartHz = startHz;
        StepHz = stepHz;
        Count = count;
    }

    /// <summary>Frequency of bin 0, Hz.</summary>
    public double StartHz { get; }
    /// <summary>Spacing of the bins, Hz.</summary>
    public double StepHz { get; }
    /// <summary>Number of bins.</summary>
    public int Count { get; }
    /// <summary>Frequency of the last bin, Hz.</summary>
    public double EndHz => StartHz + (Count - 1) * StepHz;

    /// <summary>Frequency of bin <paramref name="j"/>, Hz.</summary>
    public double this[int j] => StartHz + j * StepHz;

    /// <summary>A grid covering [start, end] with the given step.</summary>
    public static FrequencyGrid Covering(double startHz, double endHz, double stepHz)
    {
        var n = (int)Math.Ceiling((endHz - startHz) / stepHz) + 1;
        return new FrequencyGrid(startHz, stepHz, Math.Max(1, n));
    }

    /// <summary>The frequencies of all bins, Hz.</summary>
    public double[] ToArray()
    {
        var a = new double[Count];
        for (var j = 0; j < Count; j++) a[j] = this[j];
        return a;
    }
}
