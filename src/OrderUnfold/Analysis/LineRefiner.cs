using MathNet.Numerics.LinearAlgebra;
using MathNet.Numerics.Optimization;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;

namespace OrderUnfold.Analysis;

/// <summary>Options of <see cref="LineRefiner"/>.</summary>
public sealed record RefineOptions
{
    /// <summary>Fit an intrinsic Lorentzian width per line (convolved with the Airy profile).</summary>
    public bool FitWidths { get; init; }

    /// <summary>Residual-bootstrap replicates (0: none).</summary>
    public int Bootstrap { get; init; }

    /// <summary>Seed of the bootstrap resampling.</summary>
    public int Seed { get; init; } = 1;

    /// <summary>Minimum signal-to-noise ratio (intensity / its standard error) for a line to be kept.</summary>
    public double MinSnr { get; init; } = 5;

    /// <summary>Δχ² to the best alternative placement below which a line's order is called doubtful.</summary>
    public double DoubtfulDeltaChiSquare { get; init; } = 25;

    /// <summary>Alternative placements (near-aliases) tried per line.</summary>
    public int AliasCandidates { get; init; } = 4;

    /// <summary>Maximum Levenberg–Marquardt iterations.</summary>
    public int MaxIterations { get; init; } = 200;
}

/// <summary>How sure the tool is that a line sits in the order given.</summary>
public enum OrderVerdict
{
    /// <summary>Every alternative placement tried fits clearly worse (Δχ² above the threshold).</summary>
    Secure,

    /// <summary>An alternative placement fits almost as well.</summary>
    Doubtful,

    /// <summary>One instrument only: orders are not determined at all.</summary>
    Unknown,
}

/// <summary>Diagnostics of one refinement.</summary>
/// <param name="Converged">True when Levenberg–Marquardt stopped on a convergence criterion.</param>
/// <param name="ExitReason">MathNet's exit reason, as text.</param>
/// <param name="Iterations">Iterations used.</param>
/// <param name="ChiSquare">χ² at the solution.</param>
/// <param name="ReducedChiSquare">χ² per degree of freedom.</param>
/// <param name="DetectionThresholdDeltaChiSquare">Δχ² a line must add to be kept (from MinSnr and the BIC penalty).</param>
/// <param name="Dropped">Grid clusters dropped as not significant after refinement.</param>
public sealed record RefinementDiagnostics(bool Converged, string ExitReason, int Iterations, double ChiSquare, double ReducedChiSquare,
    double DetectionThresholdDeltaChiSquare, int Dropped);

/// <summary>
/// Off-grid refinement of the lines of an NNLS grid solution against the raw sweeps: positions, intensities
/// (optionally intrinsic widths), per-sweep offsets, gains and backgrounds fitted jointly by Levenberg–Marquardt
/// (MathNet.Numerics). Gives standard errors (covariance scaled by the reduced χ²), the Cramér–Rao bound
/// (the unscaled covariance at the solution), optional residual-bootstrap errors, significance-based pruning,
/// a detection-limit curve, and for each line Δχ² to its best alternative placement (order confidence).
/// </summary>
public static class LineRefiner
{
    public static (UnfoldResult Result, RefinementDiagnostics Diagnostics) Refine(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, RefineOptions? options = null)
    {
        options ??= new RefineOptions();
        var warnings = grid.Warnings.ToList();
        var data = new Data(sweeps);
        var lines = grid.Lines.ToList();
        if (lines.Count == 0)
        {
            var diag0 = new RefinementDiagnostics(true, "no lines", 0, double.NaN, grid.ReducedChiSquare, double.NaN, 0);
            return (grid with { DetectionLimit = DetectionLimit(sweeps, grid, Threshold(options, data.M), 1.0) }, diag0);
        }

        var threshold = Threshold(options, data.M);
        var layout = new Layout(lines.Count, sweeps.Count, options.FitWidths);
        var p0 = layout.Initial(lines, grid.Sweeps);
        var fit = Fit(data, layout, p0, options);
        var dropped = 0;

        // prune lines whose intensity is not significant (Wald test with the χ²-scaled covariance), weakest first
        while (layout.Lines > 1)
        {
            var z = Enumerable.Range(0, layout.Lines).Select(j => fit.P[layout.A(j)] / Math.Sqrt(Math.Max(fit.Scaled[layout.A(j), layout.A(j)], 1e-300))).ToArray();
            var weakest = Enumerable.Range(0, layout.Lines).MinBy(j => z[j]);
            if (z[weakest] * z[weakest] >= threshold && fit.P[layout.A(weakest)] > 0) break;
            (layout, var p) = layout.Without(weakest, fit.P);
            lines.RemoveAt(weakest);
            dropped++;
            fit = Fit(data, layout, p, options);
        }

        if (!fit.Converged) warnings.Add($"line refinement did not converge ({fit.Reason}); positions are the refined values at the last iteration and may be off");

        // merge lines that collapsed onto each other (singular covariance)
        var anchor = Enumerable.Range(0, layout.Lines).MaxBy(j => fit.P[layout.A(j)]);
        var anchorHz = fit.P[layout.Nu(anchor)];
        var aAnchor = fit.P[layout.A(anchor)];
        var bootstrap = options.Bootstrap > 0 ? BootstrapSigmas(data, layout, fit, anchor, options) : null;
        var refined = new List<UnfoldedLine>();
        var ordersResolved = grid.OrdersResolved;
        for (var j = 0; j < layout.Lines; j++)
        {
            var nu = fit.P[layout.Nu(j)] - anchorHz;
            var a = fit.P[layout.A(j)];
            double VarDiff(Matrix<double> c, int i1, int i2) => c[i1, i1] + c[i2, i2] - 2 * c[i1, i2];
            var sigNu = j == anchor ? 0 : Math.Sqrt(Math.Max(0, VarDiff(fit.Scaled, layout.Nu(j), layout.Nu(anchor))));
            var crbNu = j == anchor ? 0 : Math.Sqrt(Math.Max(0, VarDiff(fit.Unscaled, layout.Nu(j), layout.Nu(anchor))));
            var rel = a / aAnchor;
            var ca = fit.Scaled;
            var varRel = j == anchor ? 0 : rel * rel * (ca[layout.A(j), layout.A(j)] / (a * a) + ca[layout.A(anchor), layout.A(anchor)] / (aAnchor * aAnchor)
                                                  - 2 * ca[layout.A(j), layout.A(anchor)] / (a * aAnchor));
            var snr = a / Math.Sqrt(Math.Max(ca[layout.A(j), layout.A(j)], 1e-300));
            var note = new List<string>();
            double? bootSigma = bootstrap?[j];
            var reportedSigma = sigNu;
            if (bootSigma is double bs && j != anchor && (bs > 1.43 * sigNu || bs < 0.7 * sigNu))
            {
                reportedSigma = bs;
                note.Add($"covariance and bootstrap errors disagree ({Units.Quantity.FormatFrequency(sigNu, 2)} vs {Units.Quantity.FormatFrequency(bs, 2)}): bootstrap used");
            }

            if (!double.IsFinite(sigNu)) note.Add("singular covariance: no uncertainty for this line");
            double? width = options.FitWidths ? fit.P[layout.W(j)] : null;
            double? widthSigma = options.FitWidths ? Math.Sqrt(Math.Max(0, fit.Scaled[layout.W(j), layout.W(j)])) : null;
            refined.Add(new UnfoldedLine(nu, rel, a, snr, lines[j].FirstBin, lines[j].LastBin)
            {
                FrequencySigmaHz = double.IsFinite(reportedSigma) ? reportedSigma : null,
                FrequencyCrbHz = double.IsFinite(crbNu) ? crbNu : null,
                IntensitySigma2 = double.IsFinite(varRel) && varRel >= 0 ? Math.Sqrt(varRel) : null,
                BootstrapSigmaHz = bootSigma,
                WidthHz = width,
                WidthSigmaHz = widthSigma,
                Verdict = ordersResolved ? OrderVerdict.Secure : OrderVerdict.Unknown,
                Note = note.Count > 0 ? string.Join("; ", note) : null,
            });
        }

        // order confidence: Δχ² of the best alternative placement of each line
        if (ordersResolved)
        {
            var instruments = sweeps.Select(s => s.Instrument).DistinctBy(i => i.FsrHz).ToList();
            var origin = grid.Sweeps[0].OffsetHz + anchorHz; // old relative frequency − origin = new relative frequency
            var window = (grid.Grid.StartHz - origin, grid.Grid.EndHz - origin);
            for (var j = 0; j < refined.Count; j++)
            {
                var (shift, dchi) = BestAlias(data, layout, fit, j, instruments, window, anchorHz, options);
                var doubtful = dchi < options.DoubtfulDeltaChiSquare;
                refined[j] = refined[j] with
                {
                    AliasShiftHz = double.IsFinite(shift) ? shift : null,
                    AliasDeltaChiSquare = double.IsFinite(dchi) ? dchi : null,
                    Doubtful = doubtful,
                    Verdict = doubtful ? OrderVerdict.Doubtful : OrderVerdict.Secure,
                };
                if (doubtful)
                    warnings.Add($"line at {Units.Quantity.FormatFrequency(refined[j].FrequencyHz)}: its order is doubtful; moved by {Units.Quantity.FormatFrequency(shift)} it fits almost as well (Δχ² = {dchi:F1})");
            }
        }

        // sweep fits with the refined model
        var model = data.Model(layout, fit.P);
        var sweepFits = new List<SweepFit>();
        for (var k = 0; k < sweeps.Count; k++)
        {
            var (start, count) = data.Range(k);
            double chi = 0, ss = 0;
            for (var i = 0; i < count; i++)
            {
                var r = data.Y[start + i] - model[start + i];
                ss += r * r;
                chi += r * r * data.W[start + i];
            }

            var dof = Math.Max(1, count - (layout.Count / sweeps.Count));
            var phi = (k == 0 ? 0 : fit.P[layout.Phi(k)]) - anchorHz;
            var g = k == 0 ? 1 : fit.P[layout.G(k)];
            sweepFits.Add(grid.Sweeps[k] with
            {
                OffsetHz = phi, Gain = g, Background = fit.P[layout.B(k)], ChiSquare = chi, ReducedChiSquare = chi / dof, ResidualRms = Math.Sqrt(ss / count),
                Model = model[start..(start + count)],
            });
        }

        // internal frequencies are relative to sweep 0's origin: internal = (old relative) − φ₀(old)
        var phi0 = grid.Sweeps[0].OffsetHz;
        var shiftedGrid = new FrequencyGrid(grid.Grid.StartHz - phi0 - anchorHz, grid.Grid.StepHz, grid.Grid.Count);
        var detection = DetectionLimit(sweeps, grid with { Grid = shiftedGrid, Sweeps = sweepFits }, threshold, aAnchor);
        var spectrumScale = grid.Lines.Count > 0 ? grid.Lines.Max(l => l.RawIntensity) / aAnchor : 1;
        var result = grid with
        {
            Grid = shiftedGrid,
            Spectrum = grid.Spectrum.Select(v => v * spectrumScale).ToArray(),
            Lines = refined.OrderBy(l => l.FrequencyHz).ToList(),
            Sweeps = sweepFits,
            DetectionLimit = detection,
            Warnings = warnings,
            ReducedChiSquare = fit.ChiSquare / Math.Max(1, data.M - layout.Count),
            Refined = true,
        };
        var diag = new RefinementDiagnostics(fit.Converged, fit.Reason, fit.Iterations, fit.ChiSquare, fit.ChiSquare / Math.Max(1, data.M - layout.Count), threshold, dropped);
        return (result, diag);
    }

    /// <summary>Δχ² a line must add: the larger of MinSnr² and the BIC penalty for two parameters, 2·ln(m).</summary>
    public static double Threshold(RefineOptions options, int samples) => Math.Max(options.MinSnr * options.MinSnr, 2 * Math.Log(Math.Max(2, samples)));

    // ---------------------------------------------------------------- model

    /// <summary>All samples of all sweeps, concatenated, with their weights 1/σ².</summary>
    internal sealed class Data
    {
        public Data(IReadOnlyList<CalibratedSweep> sweeps)
        {
            Sweeps = sweeps;
            Start = new int[sweeps.Count + 1];
            for (var k = 0; k < sweeps.Count; k++) Start[k + 1] = Start[k] + sweeps[k].Signal.Length;
            M = Start[^1];
            Y = new double[M];
            W = new double[M];
            F = new double[M];
            K = new int[M];
            for (var k = 0; k < sweeps.Count; k++)
            {
                var s = sweeps[k];
                for (var i = 0; i < s.Signal.Length; i++)
                {
                    Y[Start[k] + i] = s.Signal[i];
                    W[Start[k] + i] = 1 / (s.NoiseSigma * s.NoiseSigma);
                    F[Start[k] + i] = s.ScanHz[i];
                    K[Start[k] + i] = k;
                }
            }
        }

        public IReadOnlyList<CalibratedSweep> Sweeps { get; }
        public int[] Start { get; }
        public int M { get; }
        public double[] Y { get; }
        public double[] W { get; }
        public double[] F { get; }
        public int[] K { get; }

        public (int Start, int Count) Range(int k) => (Start[k], Start[k + 1] - Start[k]);

        /// <summary>Airy profile of line j in sweep k with optional intrinsic width, and its derivative in δ.</summary>
        public static (double T, double dT) Profile(Instrument inst, double delta, double width)
        {
            var lw = inst.LinewidthHz;
            var finesse = width > 0 ? inst.FsrHz / (lw + width) : inst.Finesse;
            var area = width > 0 ? lw / (lw + width) : 1.0;
            var fc = Airy.CoefficientOfFinesse(finesse);
            var arg = Math.PI * delta / inst.FsrHz;
            var s = Math.Sin(arg);
            var t = 1 / (1 + fc * s * s);
            var dt = -fc * Math.Sin(2 * arg) * (Math.PI / inst.FsrHz) * t * t;
            return (area * t, area * dt);
        }

        public double[] Model(Layout layout, IReadOnlyList<double> p)
        {
            var y = new double[M];
            for (var k = 0; k < Sweeps.Count; k++)
            {
                var inst = Sweeps[k].Instrument;
                var phi = k == 0 ? 0 : p[layout.Phi(k)];
                var g = k == 0 ? 1 : p[layout.G(k)];
                var b = p[layout.B(k)];
                for (var i = Start[k]; i < Start[k + 1]; i++)
                {
                    var v = 0.0;
                    for (var j = 0; j < layout.Lines; j++)
                        v += p[layout.A(j)] * Profile(inst, p[layout.Nu(j)] - phi - F[i], layout.Widths ? Math.Max(0, p[layout.W(j)]) : 0).T;
                    y[i] = g * v + b;
                }
            }

            return y;
        }

        public Matrix<double> Jacobian(Layout layout, IReadOnlyList<double> p)
        {
            var jac = Matrix<double>.Build.Dense(M, layout.Count);
            for (var k = 0; k < Sweeps.Count; k++)
            {
                var inst = Sweeps[k].Instrument;
                var phi = k == 0 ? 0 : p[layout.Phi(k)];
                var g = k == 0 ? 1 : p[layout.G(k)];
                for (var i = Start[k]; i < Start[k + 1]; i++)
                {
                    double sumT = 0, sumDT = 0;
                    for (var j = 0; j < layout.Lines; j++)
                    {
                        var w = layout.Widths ? Math.Max(0, p[layout.W(j)]) : 0;
                        var a = p[layout.A(j)];
                        var (t, dt) = Profile(inst, p[layout.Nu(j)] - phi - F[i], w);
                        jac[i, layout.Nu(j)] = g * a * dt;
                        jac[i, layout.A(j)] = g * t;
                        if (layout.Widths)
                        {
                            var h = inst.LinewidthHz * 1e-3;
                            var tp = Profile(inst, p[layout.Nu(j)] - phi - F[i], w + h).T;
                            jac[i, layout.W(j)] = g * a * (tp - t) / h;
                        }

                        sumT += a * t;
                        sumDT += a * dt;
                    }

                    if (k > 0)
                    {
                        jac[i, layout.Phi(k)] = -g * sumDT;
                        jac[i, layout.G(k)] = sumT;
                    }

                    jac[i, layout.B(k)] = 1;
                }
            }

            return jac;
        }
    }

    /// <summary>Parameter vector layout: ν (lines), a (lines), w (lines, optional), φ (sweeps 1..), g (sweeps 1..), b (sweeps).</summary>
    internal sealed record Layout(int Lines, int SweepCount, bool Widths)
    {
        public int Nu(int j) => j;
        public int A(int j) => Lines + j;
        public int W(int j) => 2 * Lines + j;
        private int Base => (Widths ? 3 : 2) * Lines;
        public int Phi(int k) => Base + (k - 1);
        public int G(int k) => Base + (SweepCount - 1) + (k - 1);
        public int B(int k) => Base + 2 * (SweepCount - 1) + k;
        public int Count => Base + 3 * SweepCount - 2;

        public double[] Initial(IReadOnlyList<UnfoldedLine> lines, IReadOnlyList<SweepFit> sweeps)
        {
            // grid results are relative to the anchor; internally sweep 0's origin is 0
            var phi0 = sweeps[0].OffsetHz;
            var p = new double[Count];
            for (var j = 0; j < Lines; j++)
            {
                p[Nu(j)] = lines[j].FrequencyHz - phi0;
                p[A(j)] = lines[j].RawIntensity;
                if (Widths) p[W(j)] = 0;
            }

            for (var k = 1; k < SweepCount; k++)
            {
                p[Phi(k)] = sweeps[k].OffsetHz - phi0;
                p[G(k)] = sweeps[k].Gain / sweeps[0].Gain;
            }

            for (var k = 0; k < SweepCount; k++) p[B(k)] = sweeps[k].Background;
            return p;
        }

        /// <summary>The layout without line j, and the parameter vector mapped onto it.</summary>
        public (Layout Layout, double[] P) Without(int j, IReadOnlyList<double> p)
        {
            var next = this with { Lines = Lines - 1 };
            var q = new double[next.Count];
            var t = 0;
            for (var i = 0; i < Lines; i++)
            {
                if (i == j) continue;
                q[next.Nu(t)] = p[Nu(i)];
                q[next.A(t)] = p[A(i)];
                if (Widths) q[next.W(t)] = p[W(i)];
                t++;
            }

            for (var k = 1; k < SweepCount; k++)
            {
                q[next.Phi(k)] = p[Phi(k)];
                q[next.G(k)] = p[G(k)];
            }

            for (var k = 0; k < SweepCount; k++) q[next.B(k)] = p[B(k)];
            return (next, q);
        }
    }

    internal sealed record FitResult(double[] P, Matrix<double> Unscaled, Matrix<double> Scaled, double ChiSquare, bool Converged, string Reason, int Iterations);

    internal static FitResult Fit(Data data, Layout layout, double[] p0, RefineOptions options, double[]? y = null)
    {
        var observedY = Vector<double>.Build.DenseOfArray(y ?? data.Y);
        var x = Vector<double>.Build.Dense(data.M, i => i);
        var w = Vector<double>.Build.DenseOfArray(data.W);
        var model = ObjectiveFunction.NonlinearModel(
            (p, _) => Vector<double>.Build.DenseOfArray(data.Model(layout, p.ToArray())),
            (p, _) => data.Jacobian(layout, p.ToArray()),
            x, observedY, w);
        var lower = new double[layout.Count];
        var upper = new double[layout.Count];
        var scales = new double[layout.Count];
        for (var i = 0; i < layout.Count; i++)
        {
            lower[i] = double.NegativeInfinity;
            upper[i] = double.PositiveInfinity;
            scales[i] = 1;
        }

        var lw = data.Sweeps.Min(s => s.Instrument.LinewidthHz);
        for (var j = 0; j < layout.Lines; j++)
        {
            scales[layout.Nu(j)] = lw;
            scales[layout.A(j)] = Math.Max(Math.Abs(p0[layout.A(j)]), 1e-12);
            if (layout.Widths) scales[layout.W(j)] = lw;
        }

        for (var k = 1; k < layout.SweepCount; k++)
        {
            scales[layout.Phi(k)] = lw;
            scales[layout.G(k)] = Math.Max(Math.Abs(p0[layout.G(k)]), 1e-12);
        }

        NonlinearMinimizationResult r;
        var converged = true;
        string reason;
        try
        {
            var lm = new LevenbergMarquardtMinimizer(maximumIterations: options.MaxIterations);
            r = lm.FindMinimum(model, Vector<double>.Build.DenseOfArray(p0), null, null, Vector<double>.Build.DenseOfArray(scales));
            reason = r.ReasonForExit.ToString();
            converged = r.ReasonForExit is not (ExitCondition.ExceedIterations or ExitCondition.InvalidValues or ExitCondition.None or ExitCondition.ManuallyStopped);
        }
        catch (Exception e) when (e is MaximumIterationsException or ArithmeticException or ArgumentException)
        {
            return Summarise(data, layout, p0, false, e.GetType().Name, options.MaxIterations, y);
        }

        return Summarise(data, layout, r.MinimizingPoint.ToArray(), converged, reason, r.Iterations, y);
    }

    private static FitResult Summarise(Data data, Layout layout, double[] p, bool converged, string reason, int iterations, double[]? yObs)
    {
        var y = yObs ?? data.Y;
        var model = data.Model(layout, p);
        double chi = 0;
        for (var i = 0; i < data.M; i++) chi += (y[i] - model[i]) * (y[i] - model[i]) * data.W[i];
        var jac = data.Jacobian(layout, p);
        var jw = jac.Clone();
        for (var i = 0; i < data.M; i++)
        {
            var sw = Math.Sqrt(data.W[i]);
            for (var c = 0; c < layout.Count; c++) jw[i, c] *= sw;
        }

        var fisher = jw.TransposeThisAndMultiply(jw);
        Matrix<double> unscaled;
        try
        {
            unscaled = fisher.Inverse();
            if (unscaled.Enumerate().Any(v => !double.IsFinite(v))) throw new ArithmeticException();
        }
        catch (Exception e) when (e is ArithmeticException or ArgumentException)
        {
            unscaled = Matrix<double>.Build.Dense(layout.Count, layout.Count, double.NaN);
        }

        var red = chi / Math.Max(1, data.M - layout.Count);
        return new FitResult(p, unscaled, unscaled * red, chi, converged, reason, iterations);
    }

    // ---------------------------------------------------------------- bootstrap

    private static double[] BootstrapSigmas(Data data, Layout layout, FitResult fit, int anchor, RefineOptions options)
    {
        var rng = new Random(options.Seed);
        var model = data.Model(layout, fit.P);
        var resid = new double[data.M];
        for (var i = 0; i < data.M; i++) resid[i] = data.Y[i] - model[i];
        var samples = new List<double[]>();
        for (var b = 0; b < options.Bootstrap; b++)
        {
            var y = new double[data.M];
            for (var k = 0; k < data.Sweeps.Count; k++)
            {
                var (s, c) = data.Range(k);
                for (var i = 0; i < c; i++) y[s + i] = model[s + i] + resid[s + rng.Next(c)];
            }

            var f = Fit(data, layout, fit.P, options with { MaxIterations = 50 }, y);
            samples.Add(Enumerable.Range(0, layout.Lines).Select(j => f.P[layout.Nu(j)] - f.P[layout.Nu(anchor)]).ToArray());
        }

        var result = new double[layout.Lines];
        for (var j = 0; j < layout.Lines; j++)
        {
            var v = samples.Select(s => s[j]).ToArray();
            var mean = v.Average();
            result[j] = Math.Sqrt(v.Sum(t => (t - mean) * (t - mean)) / Math.Max(1, v.Length - 1));
        }

        return result;
    }

    // ---------------------------------------------------------------- order confidence

    /// <summary>Shifts Δ that make a line look alike in at least one instrument, ranked by alias margin (smallest first).</summary>
    internal static List<double> AliasShifts(IReadOnlyList<Instrument> instruments, double lineHz, (double Start, double End) window, int count)
    {
        var shifts = new List<(double d, double margin)>();
        foreach (var inst in instruments)
        {
            var mMax = (int)Math.Ceiling((window.End - window.Start) / inst.FsrHz);
            for (var m = -mMax; m <= mMax; m++)
            {
                if (m == 0) continue;
                var d = m * inst.FsrHz;
                var target = lineHz + d;
                if (target < window.Start || target > window.End) continue;
                shifts.Add((d, AliasMargin.Margin(instruments, d)));
            }
        }

        return shifts.OrderBy(s => s.margin).Select(s => s.d).Distinct().Take(count).ToList();
    }

    private static (double Shift, double DeltaChi) BestAlias(Data data, Layout layout, FitResult fit, int j, IReadOnlyList<Instrument> instruments,
        (double Start, double End) window, double anchorHz, RefineOptions options)
    {
        var nu = fit.P[layout.Nu(j)];
        var shifts = AliasShifts(instruments, nu - anchorHz, window, options.AliasCandidates);
        var bestShift = double.NaN;
        var bestDelta = double.PositiveInfinity;
        // other lines fixed; refit the moved line's position and intensity and the backgrounds
        var others = fit.P.ToArray();
        others[layout.A(j)] = 0;
        var fixedModel = data.Model(layout, others);
        foreach (var d in shifts)
        {
            var chi = RefitMoved(data, layout, fit.P, j, nu + d, fixedModel);
            var delta = chi - fit.ChiSquare;
            if (delta < bestDelta)
            {
                bestDelta = delta;
                bestShift = d;
            }
        }

        return (bestShift, Math.Max(0, bestDelta));
    }

    /// <summary>χ² after moving line j to <paramref name="nuNew"/> and refitting its position, intensity and the backgrounds
    /// (Gauss–Newton, a few steps; the other lines stay as fitted).</summary>
    private static double RefitMoved(Data data, Layout layout, double[] p, int j, double nuNew, double[] fixedModel)
    {
        var nu = nuNew;
        var a = p[layout.A(j)];
        var k = data.Sweeps.Count;
        var bg = new double[k];
        var width = layout.Widths ? Math.Max(0, p[layout.W(j)]) : 0;
        var lw = data.Sweeps.Min(s => s.Instrument.LinewidthHz);
        double chi = double.PositiveInfinity;
        for (var it = 0; it < 8; it++)
        {
            // parameters: nu, a, bg_k (offsets to fixedModel's backgrounds)
            var n = 2 + k;
            var jtj = Matrix<double>.Build.Dense(n, n);
            var jtr = Vector<double>.Build.Dense(n);
            chi = 0;
            var row = new double[n];
            for (var s = 0; s < k; s++)
            {
                var inst = data.Sweeps[s].Instrument;
                var phi = s == 0 ? 0 : p[layout.Phi(s)];
                var g = s == 0 ? 1 : p[layout.G(s)];
                for (var i = data.Start[s]; i < data.Start[s + 1]; i++)
                {
                    var (t, dt) = Data.Profile(inst, nu - phi - data.F[i], width);
                    var r = data.Y[i] - (fixedModel[i] + g * a * t + bg[s]);
                    var wgt = data.W[i];
                    chi += r * r * wgt;
                    Array.Clear(row);
                    row[0] = g * a * dt;
                    row[1] = g * t;
                    row[2 + s] = 1;
                    for (var u = 0; u < n; u++)
                    {
                        if (row[u] == 0) continue;
                        jtr[u] += wgt * row[u] * r;
                        for (var v = 0; v < n; v++) jtj[u, v] += wgt * row[u] * row[v];
                    }
                }
            }

            for (var u = 0; u < n; u++) jtj[u, u] *= 1.0001;
            Vector<double> step;
            try
            {
                step = jtj.Solve(jtr);
            }
            catch (ArithmeticException)
            {
                break;
            }

            if (!step.All(double.IsFinite)) break;
            nu += Math.Clamp(step[0], -lw, lw);
            a = Math.Max(0, a + step[1]);
            for (var s = 0; s < k; s++) bg[s] += step[2 + s];
        }

        // final χ²
        double final = 0;
        for (var s = 0; s < k; s++)
        {
            var inst = data.Sweeps[s].Instrument;
            var phi = s == 0 ? 0 : p[layout.Phi(s)];
            var g = s == 0 ? 1 : p[layout.G(s)];
            for (var i = data.Start[s]; i < data.Start[s + 1]; i++)
            {
                var r = data.Y[i] - (fixedModel[i] + g * a * Data.Profile(inst, nu - phi - data.F[i], width).T + bg[s]);
                final += r * r * data.W[i];
            }
        }

        return Math.Min(final, chi);
    }

    // ---------------------------------------------------------------- detection limit

    /// <summary>
    /// Smallest intensity (relative to <paramref name="scale"/>) that would have added the threshold Δχ² at each grid
    /// frequency: a_min(ν) = √(threshold / Σ_k Σ_i (g_k T_k(ν − φ_k − f_k(x_i)) / σ_k)²). The inner sum is periodic in ν,
    /// so it is computed once per sweep on the periodic grid as (T² ⊛ Sᵀ1). Correlation with existing lines is ignored
    /// (the limit is optimistic where a candidate frequency shares its folded position with a strong line).
    /// </summary>
    internal static double[] DetectionLimit(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult grid, double threshold, double scale)
    {
        var n = grid.Grid.Count;
        var info = new double[n];
        for (var k = 0; k < sweeps.Count; k++)
        {
            var s = sweeps[k];
            var inst = s.Instrument;
            var step = Math.Min(grid.Grid.StepHz / 2, inst.LinewidthHz / 20);
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
