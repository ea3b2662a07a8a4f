using OrderUnfold.Instruments;
using OrderUnfold.Inversion;

namespace OrderUnfold.Analysis;

/// <summary>One transverse family as fitted to the sweeps.</summary>
/// <param name="N">Family index.</param>
/// <param name="ApparentOffsetFsr">Apparent offset after TEM00, fraction of the FSR.</param>
/// <param name="OffsetSigmaFsr">Standard uncertainty of the offset, fraction of the FSR.</param>
/// <param name="RelativeHeight">Peak height relative to TEM00.</param>
/// <param name="HeightSigma">Standard uncertainty of the height.</param>
public sealed record FittedFamily(int N, double ApparentOffsetFsr, double OffsetSigmaFsr, double RelativeHeight, double HeightSigma);

/// <summary>What <see cref="FamilyFit.Fit"/> found for one instrument.</summary>
/// <param name="Instrument">Instrument name.</param>
/// <param name="Families">The fitted families.</param>
/// <param name="ChiSquareBefore">χ² of the instrument's sweeps with the families as measured (gains and backgrounds refitted).</param>
/// <param name="ChiSquareAfter">χ² with the fitted families.</param>
/// <param name="Converged">Whether the fit stopped on a convergence criterion.</param>
/// <param name="Iterations">Levenberg–Marquardt iterations.</param>
public sealed record FamilyFitResult(string Instrument, IReadOnlyList<FittedFamily> Families, double ChiSquareBefore, double ChiSquareAfter, bool Converged,
    int Iterations);

/// <summary>
/// Fits the offsets and heights of an instrument's transverse families to its sweeps, with the refined lines (positions,
/// relative intensities, widths) and each sweep's origin held: y = b_k + G_k·Σ_j r_j·[P(ν_j − φ_k − f) + Σ_N h_N·P(ν_j − φ_k
/// − f − s_N)], with one gain G_k and background b_k per sweep, and h_N, s_N = o_N·FSR shared by all sweeps of the cavity
/// (P the Airy peak of the line's width, as in the line refinement). Levenberg–Marquardt on the normal equations; the
/// uncertainties from (JᵀWJ)⁻¹ scaled by the reduced χ² when that exceeds 1. The families are then a property of the
/// cavity fitted like the lines, not only read off the peak heights of the calibration.
/// </summary>
public static class FamilyFit
{
    /// <summary>Step tolerance of the fit, in units of the parameter scales (<see cref="FamilyProblem.Scales"/>): 10⁻⁸ of
    /// those is far below any uncertainty. Chosen.</summary>
    private const double StepTolerance = 1e-8;

    /// <summary>χ² decrease (absolute, in units of the noise) below which the fit has converged: far below the Δχ² of 1
    /// that one standard error costs. Chosen.</summary>
    private const double ChiSquareTolerance = 1e-6;

    /// <summary>Fits the families of <paramref name="instrument"/>; null when it has none or none of its sweeps is in the result.</summary>
    /// <param name="sweeps">The calibrated sweeps, in the order of <paramref name="result"/>'s sweep fits.</param>
    /// <param name="result">The refined unfold.</param>
    /// <param name="instrument">Instrument name.</param>
    /// <param name="maxIterations">Iteration limit.</param>
    /// <param name="cancellationToken">Checked before each iteration and each sweep's pass (<see cref="OperationCanceledException"/>).</param>
    public static FamilyFitResult? Fit(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult result, string instrument, int maxIterations = 40,
        CancellationToken cancellationToken = default)
    {
        var idx = Enumerable.Range(0, Math.Min(sweeps.Count, result.Sweeps.Count)).Where(k => sweeps[k].Instrument.Name == instrument).ToList();
        if (idx.Count == 0 || result.Lines.Count == 0) return null;
        var inst = sweeps[idx[0]].Instrument;
        if (inst.Families.Count == 0) return null;
        var problem = new FamilyProblem(idx.Select(k => sweeps[k]).ToList(), idx.Select(k => result.Sweeps[k].OffsetHz).ToArray(), result.Lines, inst, cancellationToken);
        var p0 = problem.Start(inst.Families);
        var before = problem.ChiSquare(p0);
        var scales = problem.Scales(p0);
        var outcome = LevenbergMarquardt.Minimise(problem, p0, scales, null, maxIterations, StepTolerance, ChiSquareTolerance,
            cancellationToken: cancellationToken);
        var p = outcome.P;
        var n = problem.Count;
        var dof = Math.Max(1, problem.Samples - n);
        var inflate = Math.Max(1, outcome.ChiSquare / dof);
        double[]? cov = null;
        try
        {
            var fisher = MathNet.Numerics.LinearAlgebra.Matrix<double>.Build.Dense(n, n, (i, j) => outcome.Fisher[i * n + j]);
            cov = fisher.Inverse().ToRowMajorArray();
        }
        catch (Exception e) when (e is ArgumentException or InvalidOperationException)
        {
            cov = null;
        }

        var fams = new List<FittedFamily>();
        for (var f = 0; f < inst.Families.Count; f++)
        {
            var (ih, io) = (problem.Height(f), problem.Shift(f));
            double Sigma(int i) => cov is null || !(cov[i * n + i] > 0) ? double.NaN : Math.Sqrt(cov[i * n + i] * inflate);
            var shift = p[io];
            fams.Add(new FittedFamily(inst.Families[f].N, CavityModeFamily.Frac(-shift / inst.FsrHz), Sigma(io) / inst.FsrHz, p[ih], Sigma(ih)));
        }

        return new FamilyFitResult(instrument, fams, before, outcome.ChiSquare, outcome.Converged, outcome.Iterations);
    }

    /// <summary>Parameters: b_k, G_k per sweep, then h_N, s_N per family.</summary>
    private sealed class FamilyProblem : ILeastSquaresProblem
    {
        private readonly List<CalibratedSweep> _sweeps;
        private readonly double[] _phi;
        private readonly IReadOnlyList<UnfoldedLine> _lines;
        private readonly LineShape[] _shapes;
        private readonly int _families;
        private readonly CancellationToken _cancellationToken;

        public FamilyProblem(List<CalibratedSweep> sweeps, double[] phi, IReadOnlyList<UnfoldedLine> lines, Instrument inst,
            CancellationToken cancellationToken)
        {
            _cancellationToken = cancellationToken;
            _sweeps = sweeps;
            _phi = phi;
            _lines = lines;
            _families = inst.Families.Count;
            var bare = inst with { Families = [] };
            _shapes = lines.Select(l => LineShape.For(bare, l.WidthHz is double w && w > 0 ? w : 0)).ToArray();
            Samples = sweeps.Sum(s => s.Signal.Length);
        }

        public int Count => 2 * _sweeps.Count + 2 * _families;
        public int Samples { get; }
        private int Background(int k) => 2 * k;
        private int Gain(int k) => 2 * k + 1;
        public int Height(int f) => 2 * _sweeps.Count + 2 * f;
        public int Shift(int f) => 2 * _sweeps.Count + 2 * f + 1;

        /// <summary>Start: the measured families; each sweep's gain and background by linear least squares on them.</summary>
        public double[] Start(IReadOnlyList<CavityModeFamily> families)
        {
            var p = new double[Count];
            for (var f = 0; f < _families; f++)
            {
                p[Height(f)] = families[f].RelativeHeight;
                p[Shift(f)] = families[f].GouyOffsetFsr * _sweeps[0].Instrument.FsrHz;
            }

            for (var k = 0; k < _sweeps.Count; k++)
            {
                var s = _sweeps[k];
                double n = 0, su = 0, sy = 0, suu = 0, suy = 0;
                for (var i = 0; i < s.Signal.Length; i++)
                {
                    var u = Evaluate(k, i, p, null, null);
                    n++;
                    su += u;
                    sy += s.Signal[i];
                    suu += u * u;
                    suy += u * s.Signal[i];
                }

                var det = n * suu - su * su;
                p[Gain(k)] = det > 0 ? (n * suy - su * sy) / det : 1;
                p[Background(k)] = (sy - p[Gain(k)] * su) / n;
            }

            return p;
        }

        /// <summary>Smallest scale of a background or a gain (a zero noise σ or gain must not give a zero scale).</summary>
        private const double MinScale = 1e-6;

        /// <summary>Scale of a gain as a fraction of its start value, of a height (relative to TEM00, absolute), and of a
        /// shift in linewidths: one percent, the size of a small correction. Chosen.</summary>
        private const double RelativeScale = 0.01;

        /// <summary>Typical size of each parameter, the units Levenberg–Marquardt measures steps in.</summary>
        public double[] Scales(double[] p)
        {
            var s = new double[Count];
            for (var k = 0; k < _sweeps.Count; k++)
            {
                s[Background(k)] = Math.Max(MinScale, _sweeps[k].NoiseSigma);
                s[Gain(k)] = Math.Max(MinScale, Math.Abs(p[Gain(k)]) * RelativeScale);
            }

            for (var f = 0; f < _families; f++)
            {
                s[Height(f)] = RelativeScale;
                s[Shift(f)] = RelativeScale * _sweeps[0].Instrument.LinewidthHz;
            }

            return s;
        }

        /// <summary>Σ_j r_j·[P(δ_j) + Σ h_N P(δ_j − s_N)] at sample i of sweep k; with arrays, also each family's term and its derivative in s_N.</summary>
        private double Evaluate(int k, int i, double[] p, double[]? fam, double[]? dfam)
        {
            var s = _sweeps[k];
            var total = 0.0;
            if (fam is not null) Array.Clear(fam);
            if (dfam is not null) Array.Clear(dfam);
            for (var j = 0; j < _lines.Count; j++)
            {
                var r = _lines[j].Intensity;
                var delta = _lines[j].FrequencyHz - _phi[k] - s.ScanHz[i];
                total += r * _shapes[j].Evaluate(delta).T;
                for (var f = 0; f < _families; f++)
                {
                    var (t, dt) = _shapes[j].Evaluate(delta - p[Shift(f)]);
                    total += p[Height(f)] * r * t;
                    if (fam is not null) fam[f] += r * t;
                    if (dfam is not null) dfam[f] -= r * dt;
                }
            }

            return total;
        }

        public double ChiSquare(double[] p) => Accumulate(p, null, null);

        public double Normal(double[] p, double[] jtj, double[] jtr) => Accumulate(p, jtj, jtr);

        private double Accumulate(double[] p, double[]? jtj, double[]? jtr)
        {
            var n = Count;
            if (jtj is not null) Array.Clear(jtj);
            if (jtr is not null) Array.Clear(jtr);
            var fam = new double[_families];
            var dfam = new double[_families];
            var grad = new double[n];
            var nz = new int[2 + 2 * _families];
            double chi = 0;
            for (var k = 0; k < _sweeps.Count; k++)
            {
                _cancellationToken.ThrowIfCancellationRequested();
                var s = _sweeps[k];
                var w = 1 / (s.NoiseSigma * s.NoiseSigma);
                for (var i = 0; i < s.Signal.Length; i++)
                {
                    var u = Evaluate(k, i, p, fam, dfam);
                    var g = p[Gain(k)];
                    var r = s.Signal[i] - (p[Background(k)] + g * u);
                    chi += w * r * r;
                    if (jtj is null || jtr is null) continue;
                    var m = 0;
                    nz[m++] = Background(k);
                    grad[Background(k)] = 1;
                    nz[m++] = Gain(k);
                    grad[Gain(k)] = u;
                    for (var f = 0; f < _families; f++)
                    {
                        nz[m++] = Height(f);
                        grad[Height(f)] = g * fam[f];
                        nz[m++] = Shift(f);
                        grad[Shift(f)] = g * p[Height(f)] * dfam[f];
                    }

                    for (var a = 0; a < m; a++)
                    {
                        var ia = nz[a];
                        jtr[ia] += w * grad[ia] * r;
                        for (var b = 0; b < m; b++) jtj[ia * n + nz[b]] += w * grad[ia] * grad[nz[b]];
                    }
                }
            }

            return chi;
        }
    }
}
