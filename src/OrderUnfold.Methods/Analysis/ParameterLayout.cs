using OrderUnfold.Inversion;

namespace OrderUnfold.Analysis;

/// <summary>
/// Where each parameter of the line refinement sits in its parameter vector: the line positions ν (one per line), the
/// intensities a (one per line), the intrinsic widths w (one per line, only when <see cref="FitsWidths"/>), then the
/// frequency offsets φ and gains g of sweeps 1… (sweep 0 defines the origin and the intensity scale), then the
/// backgrounds b of every sweep. The methods return indices into that vector.
/// </summary>
/// <param name="LineCount">Lines in the fit.</param>
/// <param name="SweepCount">Sweeps in the fit.</param>
/// <param name="FitsWidths">True when each line has an intrinsic width parameter.</param>
internal sealed record ParameterLayout(int LineCount, int SweepCount, bool FitsWidths)
{
    /// <summary>Intrinsic widths start at this fraction of the narrowest linewidth (the model uses |w|, so the sign is free;
    /// a small non-zero start keeps the width's derivative away from the kink at 0). Chosen, not measured.</summary>
    private const double WidthStartLinewidths = 0.1;

    /// <summary>Index of line <paramref name="line"/>'s position ν.</summary>
    public int Position(int line) => line;

    /// <summary>Index of line <paramref name="line"/>'s intensity a.</summary>
    public int Intensity(int line) => LineCount + line;

    /// <summary>Index of line <paramref name="line"/>'s intrinsic width w (only when <see cref="FitsWidths"/>).</summary>
    public int Width(int line) => 2 * LineCount + line;

    private int SweepBase => (FitsWidths ? 3 : 2) * LineCount;

    /// <summary>Index of sweep <paramref name="sweep"/>'s frequency offset φ (sweeps 1…).</summary>
    public int Offset(int sweep) => SweepBase + (sweep - 1);

    /// <summary>Index of sweep <paramref name="sweep"/>'s gain g (sweeps 1…).</summary>
    public int Gain(int sweep) => SweepBase + (SweepCount - 1) + (sweep - 1);

    /// <summary>Index of sweep <paramref name="sweep"/>'s background b (every sweep).</summary>
    public int Background(int sweep) => SweepBase + 2 * (SweepCount - 1) + sweep;

    /// <summary>Length of the parameter vector.</summary>
    public int Count => SweepBase + 3 * SweepCount - 2;

    /// <summary>Start vector from the grid result; widths start at a tenth of the narrowest linewidth (the model uses |w|).</summary>
    public double[] Initial(IReadOnlyList<UnfoldedLine> lines, IReadOnlyList<SweepFit> sweeps, double narrowLinewidthHz)
    {
        // grid results are relative to the anchor; internally sweep 0's origin is 0
        var origin = sweeps[0].OffsetHz;
        var parameters = new double[Count];
        for (var j = 0; j < LineCount; j++)
        {
            parameters[Position(j)] = lines[j].FrequencyHz - origin;
            parameters[Intensity(j)] = lines[j].RawIntensity;
            if (FitsWidths) parameters[Width(j)] = WidthStartLinewidths * narrowLinewidthHz;
        }

        for (var k = 1; k < SweepCount; k++)
        {
            parameters[Offset(k)] = sweeps[k].OffsetHz - origin;
            parameters[Gain(k)] = sweeps[k].Gain / sweeps[0].Gain;
        }

        for (var k = 0; k < SweepCount; k++) parameters[Background(k)] = sweeps[k].Background;
        return parameters;
    }

    /// <summary>The layout without line <paramref name="line"/>, and the parameter vector mapped onto it.</summary>
    public (ParameterLayout Layout, double[] Parameters) Without(int line, IReadOnlyList<double> parameters)
    {
        var next = this with { LineCount = LineCount - 1 };
        var mapped = new double[next.Count];
        var target = 0;
        for (var i = 0; i < LineCount; i++)
        {
            if (i == line) continue;
            mapped[next.Position(target)] = parameters[Position(i)];
            mapped[next.Intensity(target)] = parameters[Intensity(i)];
            if (FitsWidths) mapped[next.Width(target)] = parameters[Width(i)];
            target++;
        }

        for (var k = 1; k < SweepCount; k++)
        {
            mapped[next.Offset(k)] = parameters[Offset(k)];
            mapped[next.Gain(k)] = parameters[Gain(k)];
        }

        for (var k = 0; k < SweepCount; k++) mapped[next.Background(k)] = parameters[Background(k)];
        return (next, mapped);
    }

    /// <summary>Parameters held fixed: the positions of pinned lines.</summary>
    public bool[] FixedMask(IReadOnlyList<TrackedLine> tracked)
    {
        var mask = new bool[Count];
        for (var j = 0; j < LineCount; j++) mask[Position(j)] = tracked[j].Pinned;
        return mask;
    }

    /// <summary>Parameters not held fixed by <paramref name="mask"/>.</summary>
    public static int FreeCount(bool[] mask) => mask.Count(m => !m);
}
