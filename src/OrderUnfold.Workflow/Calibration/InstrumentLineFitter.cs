using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using static OrderUnfold.Calibration.FsrScaleEstimator;

namespace OrderUnfold.Calibration;

/// <summary>
/// Fits one instrument's sweeps alone: line positions (the anchor fixed) and intensities shared by its sweeps, and per
/// sweep an offset, a gain (the first fixed) and a background. The positions come out in this instrument's own
/// frequency scale, which is what the FSR refinement compares between instruments.
/// </summary>
internal sealed class InstrumentLineFitter
{
    private readonly List<CalibratedSweep> _group;
    private readonly List<MergedLine> _lines;
    private readonly double _fsr;
    private readonly double _coefficient;

    // parameter layout: ν (all but the anchor) | a (all) | φ (all sweeps) | g (all but the first) | b (all sweeps)
    private readonly int[] _nuIndex;
    private readonly int _aBase, _phiBase, _gBase, _bBase, _parameterCount;
    private readonly double[] _t, _dt;

    private InstrumentLineFitter(List<CalibratedSweep> group, List<MergedLine> lines, int anchor)
    {
        _group = group;
        _lines = lines;
        var inst = group[0].Instrument;
        _fsr = inst.FsrHz;
        _coefficient = Airy.CoefficientOfFinesse(inst.Finesse);
        _nuIndex = new int[lines.Count];
        var idx = 0;
        for (var j = 0; j < lines.Count; j++) _nuIndex[j] = j == anchor ? -1 : idx++;
        _aBase = idx;
        _phiBase = _aBase + lines.Count;
        _gBase = _phiBase + group.Count;
        _bBase = _gBase + group.Count - 1;
        _parameterCount = _bBase + group.Count;
        _t = new double[lines.Count];
        _dt = new double[lines.Count];
    }

    /// <summary>Fits <paramref name="group"/> (one instrument's sweeps) starting from the joint unfold's lines and origins.</summary>
    public static InstrumentLineFit Fit(List<CalibratedSweep> group, UnfoldResult result, List<MergedLine> lines, int anchor, WorkBudget? budget) =>
        new InstrumentLineFitter(group, lines, anchor).Run(result, budget);

    private InstrumentLineFit Run(UnfoldResult result, WorkBudget? budget)
    {
        var p0 = StartingParameters(result);
        var m = _group.Sum(s => s.Signal.Length);
        // whitened residuals: steps that gain less than 0.01 in χ² five times in a row move no line by a meaningful
        // fraction of its uncertainty, so the fit ends there (common practice for a stopping rule, not from a reference)
        var fit = LevenbergMarquardt.MinimiseResiduals(Eval, p0, m, LmSettings.Relative(80, 1e-10) with { CrawlChiSquare = 0.01, Budget = budget });
        var reduced = fit.ChiSquare / Math.Max(1, m - _parameterCount);
        return Positions(fit.P, fit.Covariance(), reduced);
    }

    /// <summary>Starting point: the joint unfold's lines and origins; gains and backgrounds by linear regression of each
    /// sweep on the model with unit gain.</summary>
    private double[] StartingParameters(UnfoldResult result)
    {
        var nLines = _lines.Count;
        var nS = _group.Count;
        var offsets = _group.Select(s => result.Sweeps.FirstOrDefault(f => f.Name == s.Name)?.OffsetHz ?? 0).ToArray();
        var p0 = new double[_parameterCount];
        for (var j = 0; j < nLines; j++)
        {
            if (_nuIndex[j] >= 0) p0[_nuIndex[j]] = _lines[j].Frequency;
            p0[_aBase + j] = _lines[j].Intensity;
        }

        var g0 = new double[nS];
        for (var s = 0; s < nS; s++)
        {
            p0[_phiBase + s] = offsets[s];
            var sw = _group[s];
            var model = new double[sw.Signal.Length];
            for (var i = 0; i < model.Length; i++)
                for (var j = 0; j < nLines; j++)
                {
                    var sn = Math.Sin(Math.PI * (_lines[j].Frequency - offsets[s] - sw.ScanHz[i]) / _fsr);
                    model[i] += _lines[j].Intensity / (1 + _coefficient * sn * sn);
                }

            var (g, b) = GainFit.TryFit(model, sw.Signal, out var gain, out var background) ? (gain, background) : (1, background);
            g0[s] = g > 0 ? g : 1;
            p0[_bBase + s] = b;
        }

        for (var j = 0; j < nLines; j++) p0[_aBase + j] *= g0[0];
        for (var s = 1; s < nS; s++) p0[_gBase + s - 1] = g0[s] / g0[0];
        return p0;
    }

    /// <summary>Whitened residuals of all sweeps and, when asked, their Jacobian.</summary>
    private void Eval(double[] p, double[] r, double[,]? jac)
    {
        var row = 0;
        for (var s = 0; s < _group.Count; s++)
        {
            var sw = _group[s];
            var phi = p[_phiBase + s];
            var g = s == 0 ? 1.0 : p[_gBase + s - 1];
            var bg = p[_bBase + s];
            var inv = 1 / sw.NoiseSigma;
            for (var i = 0; i < sw.Signal.Length; i++, row++)
            {
                var (sum, dphi) = Sample(p, phi, sw.ScanHz[i]);
                r[row] = (sw.Signal[i] - (g * sum + bg)) * inv;
                if (jac is null) continue;
                for (var c = 0; c < _parameterCount; c++) jac[row, c] = 0;
                for (var j = 0; j < _lines.Count; j++)
                {
                    if (_nuIndex[j] >= 0) jac[row, _nuIndex[j]] = g * p[_aBase + j] * _dt[j] * inv;
                    jac[row, _aBase + j] = g * _t[j] * inv;
                }

                jac[row, _phiBase + s] = g * dphi * inv;
                if (s > 0) jac[row, _gBase + s - 1] = sum * inv;
                jac[row, _bBase + s] = inv;
            }
        }
    }

    /// <summary>The lines' sum at one scan frequency and its derivative in the origin; leaves each line's transmission and
    /// its derivative in frequency in the work arrays.</summary>
    private (double Sum, double DPhi) Sample(double[] p, double phi, double scanHz)
    {
        var sum = 0.0;
        var dphi = 0.0;
        for (var j = 0; j < _lines.Count; j++)
        {
            var nu = _nuIndex[j] >= 0 ? p[_nuIndex[j]] : _lines[j].Frequency;
            var ph = Math.PI * (nu - phi - scanHz) / _fsr;
            var sn = Math.Sin(ph);
            var d = 1 + _coefficient * sn * sn;
            _t[j] = 1 / d;
            _dt[j] = -_coefficient * 2 * sn * Math.Cos(ph) * (Math.PI / _fsr) / (d * d);
            var a = p[_aBase + j];
            sum += a * _t[j];
            dphi -= a * _dt[j];
        }

        return (sum, dphi);
    }

    /// <summary>The fitted positions and their covariance (inflated by the reduced χ² when above 1); a line that ran more
    /// than two linewidths from where the joint unfold put it is not measured by this instrument (infinite variance).</summary>
    private InstrumentLineFit Positions(double[] parameters, MathNet.Numerics.LinearAlgebra.Matrix<double>? covariance, double reduced)
    {
        var inst = _group[0].Instrument;
        var nLines = _lines.Count;
        var freq = new double[nLines];
        var cov = new double[nLines, nLines];
        var inflate = Math.Max(1, reduced);
        for (var j = 0; j < nLines; j++)
        {
            freq[j] = _nuIndex[j] >= 0 ? parameters[_nuIndex[j]] : _lines[j].Frequency;
            for (var j2 = 0; j2 < nLines; j2++)
            {
                if (_nuIndex[j] < 0 || _nuIndex[j2] < 0) continue;
                cov[j, j2] = covariance is null ? (j == j2 ? double.PositiveInfinity : 0) : covariance[_nuIndex[j], _nuIndex[j2]] * inflate;
            }

            if (Math.Abs(freq[j] - _lines[j].Frequency) > 2 * inst.LinewidthHz) cov[j, j] = double.PositiveInfinity;
        }

        return new InstrumentLineFit(inst.Name, freq, cov, reduced);
    }
}
