namespace OrderUnfold.Analysis;

/// <summary>
/// The Jacobian rows of one sweep's samples: which parameters a row can depend on (<see cref="Index"/>, the first
/// <see cref="Used"/>: the lines and the sweep's own offset, gain and background) and, after <see cref="Fill"/>, the
/// derivatives of the model in that order (not whitened).
/// </summary>
internal sealed class SweepJacobianRows
{
    private readonly SweepSamples _samples;
    private readonly ParameterLayout _layout;
    private readonly double[] _parameters;
    private readonly int _sweep;
    private readonly SweepConstants _constants;

    /// <summary>Rows of sweep <paramref name="sweep"/> at <paramref name="parameters"/>.</summary>
    public SweepJacobianRows(SweepSamples samples, ParameterLayout layout, double[] parameters, int sweep)
    {
        _samples = samples;
        _layout = layout;
        _parameters = parameters;
        _sweep = sweep;
        _constants = new SweepConstants(samples, layout, parameters, sweep);
        Index = new int[(layout.FitsWidths ? 3 : 2) * layout.LineCount + 3];
        Row = new double[Index.Length];
        var used = 0;
        for (var j = 0; j < layout.LineCount; j++)
        {
            Index[used++] = layout.Position(j);
            Index[used++] = layout.Intensity(j);
            if (layout.FitsWidths) Index[used++] = layout.Width(j);
        }

        if (sweep > 0)
        {
            Index[used++] = layout.Offset(sweep);
            Index[used++] = layout.Gain(sweep);
        }

        Index[used++] = layout.Background(sweep);
        Used = used;
    }

    /// <summary>The parameter index of each row entry.</summary>
    public int[] Index { get; }

    /// <summary>The row of the last sample filled.</summary>
    public double[] Row { get; }

    /// <summary>Entries of <see cref="Index"/> and <see cref="Row"/> in use.</summary>
    public int Used { get; }

    /// <summary>Fills <see cref="Row"/> for sample i and returns the model there; <paramref name="slope"/> is
    /// ∂model/∂f, the model's change per Hz of the sample's scan frequency f(xᵢ).</summary>
    public double Fill(int i, out double slope)
    {
        var layout = _layout;
        var p = _parameters;
        var (offset, gain, background, shapes, wide) = (_constants.Offset, _constants.Gain, _constants.Background, _constants.Shapes, _constants.Wide);
        var f = _samples.ScanHz[i];
        double sumT = 0, sumDT = 0;
        var c = 0;
        for (var j = 0; j < layout.LineCount; j++)
        {
            var delta = p[layout.Position(j)] - offset - f;
            var (t, dt) = shapes[j].Evaluate(delta);
            var a = p[layout.Intensity(j)];
            sumT += a * t;
            sumDT += a * dt;
            Row[c++] = gain * a * dt;
            Row[c++] = gain * t;
            if (wide is not null)
            {
                // the model uses |w|; forward difference in |w|, signed by w
                var h = _constants.WidthStep;
                Row[c++] = (p[layout.Width(j)] < 0 ? -1 : 1) * gain * a * (wide[j].Evaluate(delta).T - t) / h;
            }
        }

        if (_sweep > 0)
        {
            Row[c++] = -gain * sumDT;
            Row[c++] = sumT;
        }

        Row[c] = 1;
        slope = -gain * sumDT;
        return gain * sumT + background;
    }
}

/// <summary>What one sweep's samples share: its offset, gain and background, each line's profile (and the profile at
/// the width step, when widths are fitted), and the folded distance within which a line enters a sample's row.</summary>
internal sealed class SweepConstants
{
    /// <summary>The constants of sweep <paramref name="k"/> at parameters <paramref name="p"/>.</summary>
    public SweepConstants(SweepSamples samples, ParameterLayout layout, double[] p, int k)
    {
        var inst = samples.Sweeps[k].Instrument;
        Offset = k == 0 ? 0 : p[layout.Offset(k)];
        Gain = k == 0 ? 1 : p[layout.Gain(k)];
        Background = p[layout.Background(k)];
        Shapes = SweepSamples.LineShapes(inst, layout, p);
        Wide = layout.FitsWidths ? SweepSamples.LineShapes(inst, layout, p, SweepSamples.WidthStep(inst)) : null;
        WidthStep = SweepSamples.WidthStep(inst);
        FsrHz = inst.FsrHz;
        Reach = new double[layout.LineCount];
        for (var j = 0; j < layout.LineCount; j++)
            Reach[j] = samples.CutoffLinewidths * (inst.LinewidthHz + (layout.FitsWidths ? Math.Abs(p[layout.Width(j)]) : 0));
    }

    /// <summary>Frequency offset φ of the sweep (0 for sweep 0).</summary>
    public double Offset { get; }

    /// <summary>Gain g of the sweep (1 for sweep 0).</summary>
    public double Gain { get; }

    /// <summary>Background b of the sweep.</summary>
    public double Background { get; }

    /// <summary>Each line's profile in this sweep's instrument.</summary>
    public LineShape[] Shapes { get; }

    /// <summary>Each line's profile at its width plus <see cref="WidthStep"/> (null when widths are not fitted).</summary>
    public LineShape[]? Wide { get; }

    /// <summary>Step of the forward difference in the width.</summary>
    public double WidthStep { get; }

    /// <summary>The instrument's FSR.</summary>
    public double FsrHz { get; }

    /// <summary>Per line, the folded distance within which it enters a sample's Gauss–Newton row.</summary>
    public double[] Reach { get; }
}
