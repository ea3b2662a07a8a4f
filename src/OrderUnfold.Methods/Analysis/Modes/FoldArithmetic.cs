namespace OrderUnfold.Analysis.Modes;

/// <summary>Arithmetic on positions known only modulo a folding period (the FSR of a single cavity), shared by the
/// comb search and the comb fit.</summary>
internal static class FoldArithmetic
{
    /// <summary><paramref name="x"/> modulo <paramref name="m"/>, in [0, m).</summary>
    public static double Mod(double x, double m)
    {
        var r = x % m;
        return r < 0 ? r + m : r;
    }

    /// <summary>A difference wrapped into [−f/2, f/2] when folded by <paramref name="f"/>; unchanged when not folded.</summary>
    public static double WrapTo(double d, double? f) => f is { } ff ? d - ff * Math.Round(d / ff) : d;
}
