namespace OrderUnfold.Analysis;

/// <summary>All samples of all sweeps of a line refinement, concatenated, with their weights 1/σ², and the model of the
/// lines at those samples (model, χ², normal equations, line groups).</summary>
internal sealed class SweepSamples
{
    /// <summary>Smallest background scale of a sweep (its signal's largest |value|, floored here so that an all-zero
    /// sweep does not give a zero scale to Levenberg–Marquardt).</summary>
    private const double MinSignalScale = 1e-12;

    /// <summary>Step of the forward difference in the intrinsic width, as a fraction of the instrument's linewidth: far
    /// below any width the data can resolve, far above the rounding of the Airy function. Chosen, not measured.</summary>
    private const double WidthStepLinewidths = 1e-3;

    /// <summary>Concatenates <paramref name="sweeps"/>; throws when a sweep's scan and signal lengths differ or its noise σ
    /// is not positive and finite.</summary>
    public SweepSamples(IReadOnlyList<CalibratedSweep> sweeps)
    {
        Sweeps = sweeps;
        SweepStart = new int[sweeps.Count + 1];
        for (var k = 0; k < sweeps.Count; k++)
        {
            var s = sweeps[k];
            if (s.ScanHz.Length != s.Signal.Length) throw new ArgumentException($"{s.Name}: scan and signal lengths differ ({s.ScanHz.Length} vs {s.Signal.Length})");
            if (!(s.NoiseSigma > 0) || !double.IsFinite(s.NoiseSigma)) throw new ArgumentException($"{s.Name}: the noise σ must be positive and finite but is {s.NoiseSigma}");
            SweepStart[k + 1] = SweepStart[k] + s.Signal.Length;
        }

        Count = SweepStart[^1];
        Signal = new double[Count];
        Weight = new double[Count];
        ScanHz = new double[Count];
        SignalScale = new double[sweeps.Count];
        for (var k = 0; k < sweeps.Count; k++)
        {
            var s = sweeps[k];
            var largest = 0.0;
            for (var i = 0; i < s.Signal.Length; i++)
            {
                Signal[SweepStart[k] + i] = s.Signal[i];
                Weight[SweepStart[k] + i] = 1 / (s.NoiseSigma * s.NoiseSigma);
                ScanHz[SweepStart[k] + i] = s.ScanHz[i];
                largest = Math.Max(largest, Math.Abs(s.Signal[i]));
            }

            SignalScale[k] = Math.Max(largest, MinSignalScale);
        }
    }

    /// <summary>Largest |signal| of each sweep (at least 10⁻¹²): the scale of its background in the fit.</summary>
    public double[] SignalScale { get; }

    /// <summary>The sweeps, in the order of their samples.</summary>
    public IReadOnlyList<CalibratedSweep> Sweeps { get; }

    /// <summary>Index of each sweep's first sample; the last entry is <see cref="Count"/>.</summary>
    public int[] SweepStart { get; }

    /// <summary>Samples of all sweeps.</summary>
    public int Count { get; }

    /// <summary>The measured signal of every sample.</summary>
    public double[] Signal { get; }

    /// <summary>The weight 1/σ² of every sample.</summary>
    public double[] Weight { get; }

    /// <summary>The calibrated scan frequency f(x) of every sample.</summary>
    public double[] ScanHz { get; }

    /// <summary>Lines within this many linewidths (folded, per instrument) of a sample enter its row of the Gauss–Newton
    /// matrix (see <see cref="NormalEquations"/>); infinity: every line (the dense matrix).</summary>
    public double CutoffLinewidths { get; init; } = double.PositiveInfinity;

    /// <summary>First sample and sample count of sweep <paramref name="k"/>.</summary>
    public (int Start, int Count) Range(int k) => (SweepStart[k], SweepStart[k + 1] - SweepStart[k]);

    /// <summary>Step of the forward difference in a line's intrinsic width for <paramref name="inst"/>.</summary>
    public static double WidthStep(Instrument inst) => inst.LinewidthHz * WidthStepLinewidths;

    /// <summary>The model at every sample for <paramref name="parameters"/> (written into <paramref name="into"/> when given).</summary>
    public double[] Model(ParameterLayout layout, IReadOnlyList<double> parameters, double[]? into = null)
    {
        var y = into ?? new double[Count];
        var q = parameters as double[] ?? parameters.ToArray();
        for (var k = 0; k < Sweeps.Count; k++)
        {
            var phi = k == 0 ? 0 : q[layout.Offset(k)];
            var g = k == 0 ? 1 : q[layout.Gain(k)];
            var b = q[layout.Background(k)];
            var shapes = LineShapes(Sweeps[k].Instrument, layout, q);
            for (var i = SweepStart[k]; i < SweepStart[k + 1]; i++)
            {
                var v = 0.0;
                for (var j = 0; j < layout.LineCount; j++)
                    v += q[layout.Intensity(j)] * shapes[j].Evaluate(q[layout.Position(j)] - phi - ScanHz[i]).T;
                y[i] = g * v + b;
            }
        }

        return y;
    }

    /// <summary>χ² of <paramref name="parameters"/> against <paramref name="observed"/> (default: the measured signal).</summary>
    public double ChiSquare(ParameterLayout layout, IReadOnlyList<double> parameters, double[]? observed = null)
    {
        var model = Model(layout, parameters);
        var obs = observed ?? Signal;
        double chi = 0;
        for (var i = 0; i < Count; i++) chi += (obs[i] - model[i]) * (obs[i] - model[i]) * Weight[i];
        return chi;
    }

    /// <summary>χ² and Σ residual² of sweep <paramref name="k"/> against <paramref name="model"/> (all samples).</summary>
    public (double ChiSquare, double SumOfSquares) SweepResiduals(int k, double[] model)
    {
        var (start, count) = Range(k);
        double chi = 0, ss = 0;
        for (var i = 0; i < count; i++)
        {
            var r = Signal[start + i] - model[start + i];
            ss += r * r;
            chi += r * r * Weight[start + i];
        }

        return (chi, ss);
    }

    /// <summary>
    /// Normal equations of the weighted fit at <paramref name="parameters"/> against observations <paramref name="observed"/>:
    /// fills <paramref name="jtj"/> ≈ JᵀWJ (row-major, both triangles) and <paramref name="jtr"/> = JᵀW(y − model), returns
    /// χ². See <see cref="NormalEquationPass"/> for what is exact and what is sparse.
    /// </summary>
    public double NormalEquations(ParameterLayout layout, double[] parameters, double[] observed, double[] jtj, double[] jtr) =>
        new NormalEquationPass(this, layout, parameters, observed, jtj, jtr).Run();

    /// <summary>
    /// Groups of lines that share samples: two lines are linked when, in some sweep's instrument, their folded distance
    /// is below twice the cutoff reach (so a sample could lie within the reach of both); a group is a connected set.
    /// Lines of different groups have no Gauss–Newton entry between them and fit independently but for the shared
    /// sweep parameters. Returns a group number per line (0, 1, … in order of first appearance).
    /// </summary>
    public int[] LineGroups(ParameterLayout layout, double[] parameters)
    {
        var lines = layout.LineCount;
        var parent = Enumerable.Range(0, lines).ToArray();
        int Root(int x)
        {
            while (parent[x] != x) x = parent[x] = parent[parent[x]];
            return x;
        }

        foreach (var inst in Sweeps.Select(s => s.Instrument).DistinctBy(i => (i.FsrHz, i.LinewidthHz)))
        {
            for (var i = 0; i < lines; i++)
            for (var j = i + 1; j < lines; j++)
            {
                if (!double.IsFinite(CutoffLinewidths)) { parent[Root(i)] = Root(j); continue; }
                var wi = layout.FitsWidths ? Math.Abs(parameters[layout.Width(i)]) : 0;
                var wj = layout.FitsWidths ? Math.Abs(parameters[layout.Width(j)]) : 0;
                var reach = CutoffLinewidths * (2 * inst.LinewidthHz + wi + wj);
                var d = parameters[layout.Position(i)] - parameters[layout.Position(j)];
                var folded = d - inst.FsrHz * Math.Round(d / inst.FsrHz);
                if (Math.Abs(folded) < reach) parent[Root(i)] = Root(j);
            }
        }

        var ids = new Dictionary<int, int>();
        var group = new int[lines];
        for (var j = 0; j < lines; j++)
        {
            var r = Root(j);
            if (!ids.TryGetValue(r, out var id)) ids[r] = id = ids.Count;
            group[j] = id;
        }

        return group;
    }

    /// <summary>
    /// B = JᵀW·∂model/∂c (parameters × d) for sweep k's axis shape coefficients c₁…c_d: a sample's model moves by
    /// (∂model/∂f)·δf(x) when its scan frequency f(x) is off by δf(x) = Σ δcₘ tᵐ, t the axis's normalised x.
    /// </summary>
    public double[,] AxisSensitivity(ParameterLayout layout, double[] parameters, int k, AxisUncertainty axis)
    {
        var d = axis.Polynomial.Degree;
        var b = new double[layout.Count, d];
        var rows = new SweepJacobianRows(this, layout, parameters, k);
        var powers = new double[d];
        for (var i = SweepStart[k]; i < SweepStart[k + 1]; i++)
        {
            rows.Fill(i, out var slope);
            var t = (axis.X[i - SweepStart[k]] - axis.Polynomial.Center) / axis.Polynomial.HalfRange;
            var pm = t;
            for (var m = 0; m < d; m++)
            {
                powers[m] = Weight[i] * slope * pm;
                pm *= t;
            }

            for (var u = 0; u < rows.Used; u++)
            {
                var ru = rows.Row[u];
                if (ru == 0) continue;
                for (var m = 0; m < d; m++) b[rows.Index[u], m] += ru * powers[m];
            }
        }

        return b;
    }

    /// <summary>Per-line profile constants for one instrument (<paramref name="extraWidth"/> is added to each line's |w|).</summary>
    public static LineShape[] LineShapes(Instrument inst, ParameterLayout layout, double[] parameters, double extraWidth = 0)
    {
        var shapes = new LineShape[layout.LineCount];
        for (var j = 0; j < layout.LineCount; j++)
            shapes[j] = LineShape.For(inst, (layout.FitsWidths ? Math.Abs(parameters[layout.Width(j)]) : 0) + extraWidth);
        return shapes;
    }
}
