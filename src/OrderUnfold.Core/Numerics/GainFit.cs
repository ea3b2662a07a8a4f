namespace OrderUnfold.Numerics;

/// <summary>Least-squares fit of a sweep to a model shape: y ≈ g·a + b (one gain and one background).</summary>
public static class GainFit
{
    /// <summary>Fits g and b by the normal equations; false when the model shape is constant (no unique gain).</summary>
    public static bool TryFit(IReadOnlyList<double> a, IReadOnlyList<double> y, out double gain, out double background)
    {
        var n = a.Count;
        double sa = 0, sy = 0, saa = 0, say = 0;
        for (var i = 0; i < n; i++)
        {
            sa += a[i];
            sy += y[i];
            saa += a[i] * a[i];
            say += a[i] * y[i];
        }

        var det = n * saa - sa * sa;
        if (!(det > 0))
        {
            gain = double.NaN;
            background = sy / Math.Max(1, n);
            return false;
        }

        gain = (n * say - sa * sy) / det;
        background = (sy - gain * sa) / n;
        return true;
    }
}
