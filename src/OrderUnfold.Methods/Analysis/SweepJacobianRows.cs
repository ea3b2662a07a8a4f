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
    private readonly double _offset, _gain, _background;
    private readonly LineShape[] _shapes;
    private readonly LineShape[]? _wide;

    /// <summary>Rows of sweep <paramref name="sweep"/> at <paramref name="parameters"/>.</summary>
    public SweepJacobianRows(SweepSamples samples, ParameterLayout layout, double[] parameters, int sweep)
    {
        _samples = samples;
        _layout = layout;
        _parameters = parameters;
        _sweep = sweep;
        var inst = samples.Sweeps[sweep].Instrument;
        _offset = sweep == 0 ? 0 : parameters[layout.Offset(sweep)];
        _gain = sweep == 0 ? 1 : parameters[layout.Gain(sweep)];
        _background = parameters[layout.Background(sweep)];
        _shapes = SweepSamples.LineShapes(inst, layout, parameters);
        _wide = layout.FitsWidths ? SweepSamples.LineShapes(inst, layout, parameters, SweepSamples.WidthStep(inst)) : null;
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
        var f = _samples.ScanHz[i];
        double sumT = 0, sumDT = 0;
        var c = 0;
        for (var j = 0; j < layout.LineCount; j++)
        {
            var delta = p[layout.Position(j)] - _offset - f;
            var (t, dt) = _shapes[j].Evaluate(delta);
            var a = p[layout.Intensity(j)];
            sumT += a * t;
            sumDT += a * dt;
            Row[c++] = _gain * a * dt;
            Row[c++] = _gain * t;
            if (_wide is not null)
            {
                // the model uses |w|; forward difference in |w|, signed by w
                var h = SweepSamples.WidthStep(_samples.Sweeps[_sweep].Instrument);
                Row[c++] = (p[layout.Width(j)] < 0 ? -1 : 1) * _gain * a * (_wide[j].Evaluate(delta).T - t) / h;
            }
        }

        if (_sweep > 0)
        {
            Row[c++] = -_gain * sumDT;
            Row[c++] = sumT;
        }

        Row[c] = 1;
        slope = -_gain * sumDT;
        return _gain * sumT + _background;
    }
}
