namespace OrderUnfold.Analysis;

/// <summary>
/// One pass over the samples that builds the normal equations of the line refinement (see
/// <see cref="SweepSamples.NormalEquations"/>). The model, χ² and the gradient JᵀW(y − model) are exact: every line is
/// evaluated at every sample (one Airy evaluation each). The Gauss–Newton matrix keeps, for each sample, only the lines
/// whose folded distance from it is below <see cref="SweepSamples.CutoffLinewidths"/> linewidths (plus the sweep's own
/// offset, gain and background), so its cost is Σ (parameters near a sample)² — linear in the samples the lines touch —
/// and lines that share no sample within the cutoff have no entry between them (separate blocks, see
/// <see cref="SweepSamples.LineGroups"/>). The neglected entries are products of Airy tails (below ((1 + 4K²)⁻¹)² of the
/// peak for cutoff K): they change the steps a little, not the minimum, which is fixed by the exact gradient.
/// </summary>
internal sealed class NormalEquationPass
{
    private readonly SweepSamples _samples;
    private readonly ParameterLayout _layout;
    private readonly double[] _parameters;
    private readonly double[] _observed;
    private readonly double[] _jtj;
    private readonly double[] _jtr;

    // per-sample scratch: each line's profile and its derivatives, and the sample's sparse Jacobian row
    private readonly double[] _profile;
    private readonly double[] _slope;
    private readonly double[]? _widthSlope;
    private readonly int[] _index;
    private readonly double[] _row;

    public NormalEquationPass(SweepSamples samples, ParameterLayout layout, double[] parameters, double[] observed, double[] jtj, double[] jtr)
    {
        _samples = samples;
        _layout = layout;
        _parameters = parameters;
        _observed = observed;
        _jtj = jtj;
        _jtr = jtr;
        var lines = layout.LineCount;
        _profile = new double[lines];
        _slope = new double[lines];
        _widthSlope = layout.FitsWidths ? new double[lines] : null;
        _index = new int[(layout.FitsWidths ? 3 : 2) * lines + 3];
        _row = new double[_index.Length];
    }

    /// <summary>Fills the normal equations and returns χ².</summary>
    public double Run()
    {
        Array.Clear(_jtj);
        Array.Clear(_jtr);
        double chi = 0;
        for (var k = 0; k < _samples.Sweeps.Count; k++) chi = AccumulateSweep(k, chi);
        MirrorTriangles(_jtj, _layout.Count);
        return chi;
    }

    /// <summary>Adds sweep <paramref name="k"/>'s samples; <paramref name="chi"/> is the χ² so far, the sum continued is returned.
    /// One loop over the samples, kept in one method (the hot loop of the refinement: helpers called per sample cost time).</summary>
    private double AccumulateSweep(int k, double chi)
    {
        var (layout, p, y, jtj, jtr, n) = (_layout, _parameters, _observed, _jtj, _jtr, _layout.Count);
        var (t, dt, dw, index, row) = (_profile, _slope, _widthSlope, _index, _row);
        var (scan, weight, lines) = (_samples.ScanHz, _samples.Weight, layout.LineCount);
        var sweep = new SweepConstants(_samples, layout, p, k);
        var (phi, g, b, shapes, wide, h, fsr, reach) = (sweep.Offset, sweep.Gain, sweep.Background, sweep.Shapes, sweep.Wide, sweep.WidthStep, sweep.FsrHz, sweep.Reach);
        var (first, end) = (_samples.SweepStart[k], _samples.SweepStart[k + 1]);
        for (var i = first; i < end; i++)
        {
            var f = scan[i];
            double sumT = 0, sumDT = 0;
            for (var j = 0; j < lines; j++)
            {
                var delta = p[layout.Position(j)] - phi - f;
                (t[j], dt[j]) = shapes[j].Evaluate(delta);
                var a = p[layout.Intensity(j)];
                sumT += a * t[j];
                sumDT += a * dt[j];
                if (dw is not null) dw[j] = (p[layout.Width(j)] < 0 ? -1 : 1) * g * a * (wide![j].Evaluate(delta).T - t[j]) / h;
            }

            var w = weight[i];
            var r = y[i] - (g * sumT + b);
            chi += r * r * w;
            var wr = w * r;
            // exact gradient for every line; the near ones also enter the Gauss–Newton matrix
            var used = 0;
            for (var j = 0; j < lines; j++)
            {
                var a = p[layout.Intensity(j)];
                double rn = g * a * dt[j], ra = g * t[j];
                jtr[layout.Position(j)] += wr * rn;
                jtr[layout.Intensity(j)] += wr * ra;
                if (dw is not null) jtr[layout.Width(j)] += wr * dw[j];
                var delta = p[layout.Position(j)] - phi - f;
                var folded = delta - fsr * Math.Round(delta / fsr);
                if (Math.Abs(folded) >= reach[j]) continue;
                index[used] = layout.Position(j);
                row[used++] = rn;
                index[used] = layout.Intensity(j);
                row[used++] = ra;
                if (dw is not null)
                {
                    index[used] = layout.Width(j);
                    row[used++] = dw[j];
                }
            }

            if (k > 0)
            {
                jtr[layout.Offset(k)] += wr * -g * sumDT;
                jtr[layout.Gain(k)] += wr * sumT;
                index[used] = layout.Offset(k);
                row[used++] = -g * sumDT;
                index[used] = layout.Gain(k);
                row[used++] = sumT;
            }

            jtr[layout.Background(k)] += wr;
            index[used] = layout.Background(k);
            row[used++] = 1;
            for (var u = 0; u < used; u++)
            {
                var ru = w * row[u];
                if (ru == 0) continue;
                var iu = index[u] * n;
                for (var v = u; v < used; v++) jtj[iu + index[v]] += ru * row[v];
            }
        }

        return chi;
    }

    /// <summary>
    /// Each pair of parameters was accumulated in one cell only, (index[u], index[v]) with u ≤ v in the row's order, which
    /// is not the numerical order (ν₀, a₀, ν₁, … vs the layout ν₀, ν₁, …, a₀, …): the other cell is zero, so the sum of the
    /// two is the element; written to both.
    /// </summary>
    private static void MirrorTriangles(double[] jtj, int n)
    {
        for (var u = 0; u < n; u++)
        for (var v = u + 1; v < n; v++)
        {
            var sum = jtj[u * n + v] + jtj[v * n + u];
            jtj[u * n + v] = sum;
            jtj[v * n + u] = sum;
        }
    }
}
