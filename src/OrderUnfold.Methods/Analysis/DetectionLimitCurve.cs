using OrderUnfold.Inversion;

namespace OrderUnfold.Analysis;

/// <summary>The detection-limit curve of a refinement: the smallest line intensity the data would have shown at each
/// grid frequency.</summary>
public static class DetectionLimitCurve
{
    /// <summary>Samples per linewidth of the tabulated Airy² kernel (or two per grid step, whichever is finer): twenty per
    /// linewidth resolve the peak's core well (common practice for a tabulated profile).</summary>
    private const double KernelSamplesPerLinewidth = 20;

    /// <summary>
    /// Smallest intensity (relative to <paramref name="scale"/>) that would have added the threshold Δχ² at each grid
    /// frequency: a_min(ν) = √(threshold / Σ_k Σ_i (g_k T_k(ν − φ_k − f_k(x_i)) / σ_k)²). The inner sum is periodic in ν,
    /// so it is computed once per sweep on the periodic grid as (T² ⊛ Sᵀ1). Correlation with existing lines and with the
    /// backgrounds is ignored (the limit is optimistic where a candidate frequency shares its folded position with a strong
    /// line). Bins with no information are NaN (callers write them as empty).
    /// </summary>
    public static double[] Compute(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, double threshold, double scale)
    {
        var n = grid.Grid.Count;
        var info = new double[n];
        for (var k = 0; k < sweeps.Count; k++)
        {
            var s = sweeps[k];
            var inst = s.Instrument;
            var step = Math.Min(grid.Grid.StepHz / 2, inst.LinewidthHz / KernelSamplesPerLinewidth);
            var op = new SweepOperator(inst, s.ScanHz, grid.Grid, 0, step);
            var m = op.M;
            var kernel2 = new double[m];
            for (var i = 0; i < m; i++)
            {
                var t = Airy.Transmission(i * op.StepHz, inst.FsrHz, inst.Finesse);
                kernel2[i] = t * t;
            }

            var conv = new CircularConvolver(kernel2);
            var ones = Enumerable.Repeat(1.0, s.Signal.Length).ToArray();
            var st1 = new double[m];
            op.SampleTranspose(ones, st1);
            var q = new double[m];
            conv.Apply(st1, q);
            var fit = grid.Sweeps[k];
            var c = fit.Gain / s.NoiseSigma;
            for (var j = 0; j < n; j++)
            {
                var u = SweepOperator.PositiveMod(grid.Grid[j] - fit.OffsetHz, inst.FsrHz) / op.StepHz;
                var a = (int)Math.Floor(u);
                var t = u - a;
                if (a >= m) a -= m;
                var v = (1 - t) * q[a] + t * q[a + 1 == m ? 0 : a + 1];
                info[j] += c * c * v;
            }
        }

        return info.Select(v => v > 0 ? Math.Sqrt(threshold / v) / scale : double.NaN).ToArray();
    }
}
