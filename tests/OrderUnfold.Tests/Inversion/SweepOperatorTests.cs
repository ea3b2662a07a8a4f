using CsCheck;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using Xunit;

namespace OrderUnfold.Tests.Inversion;

/// <summary>The matrix-free sweep operator: adjoint consistency and agreement with the Airy function it models.
/// Scan positions, spectra and residuals here are random (simulated) test data.</summary>
public class SweepOperatorTests
{
    private static readonly Instrument Cavity = Instrument.FromLength("A", 0.1, CavityGeometry.Planar, 150);

    /// <summary>A random, non-uniform scan over about <paramref name="spanFsr"/> FSRs (monotone, with jitter).</summary>
    private static double[] RandomScan(Random rng, int samples, double fsr, double spanFsr)
    {
        var scan = new double[samples];
        var start = (rng.NextDouble() - 0.5) * 10 * fsr;
        for (var i = 0; i < samples; i++)
        {
            var v = i / (double)(samples - 1);
            scan[i] = start + spanFsr * fsr * (v + 0.05 * (v * v - v)) + (rng.NextDouble() - 0.5) * 1e-3 * fsr;
        }

        return scan;
    }

    private static double Dot(ReadOnlySpan<double> a, ReadOnlySpan<double> b)
    {
        var s = 0.0;
        for (var i = 0; i < a.Length; i++) s += a[i] * b[i];
        return s;
    }

    private static double[] Gaussian(Random rng, int n) => Enumerable.Range(0, n).Select(_ => OrderUnfold.Simulation.Simulator.Gaussian(rng)).ToArray();

    [Fact]
    public void UnitColumnNormWithoutConvolutionMatchesTheForwardModel()
    {
        // UnitNormSquared builds K·fold(e_j) from the kernel and applies the tridiagonal SᵀS; it must equal ‖A e_j‖²
        // from the operator's own forward model (fold, FFT convolution, sampling) to rounding, for random scans and bins.
        var gen = Gen.Select(Gen.Int[0, int.MaxValue], Gen.Int[20, 3000], Gen.Int[1, 400]);
        gen.Sample((seed, samples, bins) =>
        {
            var rng = new Random(seed);
            var fsr = Cavity.FsrHz;
            var lw = Cavity.LinewidthHz;
            var grid = new FrequencyGrid((rng.NextDouble() - 0.5) * 20 * fsr, lw / 4, bins);
            var scan = RandomScan(rng, samples, fsr, 0.5 + 5 * rng.NextDouble());
            var op = new SweepOperator(Cavity, scan, grid, (rng.NextDouble() - 0.5) * 4 * fsr, lw / (5 + 30 * rng.NextDouble()));
            var j = rng.Next(bins);
            var unit = new double[bins];
            unit[j] = 1;
            var a = op.Forward(unit);
            var expected = Dot(a, a);
            var work = new double[op.M];
            var got = op.UnitNormSquared(j, work);
            Assert.True(Math.Abs(got - expected) <= 1e-10 * expected, $"bin {j}: {got} vs {expected}");
        }, iter: 40, threads: 1);
    }

    [Fact]
    public void AdjointPassesTheDotProductTest()
    {
        // Property: <A s, r> = <s, Aᵀ r> to 1e-10 relative (of |A s|·|r|) for random spectra, residuals, scans,
        // offsets, grids and periodic steps; CsCheck draws the cases (seeded by CsCheck, reproducible from its seed).
        var gen = Gen.Select(Gen.Int[0, int.MaxValue], Gen.Int[20, 3000], Gen.Int[1, 2500], Gen.Double[0.1, 1.5]);
        gen.Sample((seed, samples, bins, stepInLinewidths) =>
        {
            var rng = new Random(seed);
            var fsr = Cavity.FsrHz;
            var lw = Cavity.LinewidthHz;
            var grid = new FrequencyGrid((rng.NextDouble() - 0.5) * 20 * fsr, stepInLinewidths * lw, bins);
            var scan = RandomScan(rng, samples, fsr, 0.5 + 5 * rng.NextDouble());
            var op = new SweepOperator(Cavity, scan, grid, (rng.NextDouble() - 0.5) * 4 * fsr, lw / (5 + 30 * rng.NextDouble()));
            var s = Gaussian(rng, bins);
            var r = Gaussian(rng, samples);
            var a = op.Forward(s);
            var atr = new double[bins];
            op.AdjointAdd(r, atr);
            var lhs = Dot(a, r);
            var rhs = Dot(s, atr);
            var scale = Math.Sqrt(Dot(a, a) * Dot(r, r));
            Assert.True(Math.Abs(lhs - rhs) <= 1e-10 * scale, $"<As,r> = {lhs}, <s,Aᵀr> = {rhs}, scale {scale}");
        }, iter: 40, threads: 1);
    }

    [Fact]
    public void EachStepHasItsTranspose()
    {
        var rng = new Random(42);
        var fsr = Cavity.FsrHz;
        var grid = new FrequencyGrid(-3e9, 2.5e6, 2400);
        var scan = RandomScan(rng, 1500, fsr, 4.2);
        var op = new SweepOperator(Cavity, scan, grid, 0.37e9, 0.5e6);
        var m = op.M;

        // fold and its transpose
        var s = Gaussian(rng, grid.Count);
        var p = Gaussian(rng, m);
        var folded = new double[m];
        op.Fold(s, folded);
        var back = new double[grid.Count];
        op.FoldTransposeAdd(p, back, 1.0);
        Assert.Equal(Dot(folded, p), Dot(s, back), 1e-9 * Math.Sqrt(Dot(folded, folded) * Dot(p, p)));

        // sampling and its transpose
        var y = Gaussian(rng, op.SampleCount);
        var sampled = new double[op.SampleCount];
        op.Sample(p, sampled);
        var st = new double[m];
        op.SampleTranspose(y, st);
        Assert.Equal(Dot(sampled, y), Dot(p, st), 1e-9 * Math.Sqrt(Dot(sampled, sampled) * Dot(y, y)));

        // SᵀS (cyclic tridiagonal) equals SampleTranspose(Sample(v))
        var sts = new double[m];
        op.SampleNormal(p, sts);
        var viaSamples = new double[m];
        op.SampleTranspose(sampled, viaSamples);
        for (var a = 0; a < m; a++) Assert.Equal(viaSamples[a], sts[a], 1e-9 * (1 + Math.Abs(viaSamples[a])));

        // the convolution is self-adjoint (even kernel)
        var kp = new double[m];
        var kq = new double[m];
        var q = Gaussian(rng, m);
        op.Convolve(p, kp);
        op.Convolve(q, kq);
        Assert.Equal(Dot(kp, q), Dot(p, kq), 1e-9 * Math.Sqrt(Dot(kp, kp) * Dot(q, q)));

        // Gather and FoldUnit are the columns/rows of the fold
        var unit = new double[m];
        for (var j = 0; j < grid.Count; j += 97)
        {
            op.FoldUnit(j, unit);
            var e = new double[grid.Count];
            e[j] = 1;
            op.Fold(e, folded);
            Assert.Equal(folded, unit);
            Assert.Equal(Dot(unit, p), op.Gather(p, j), 1e-12);
        }
    }

    [Theory]
    [InlineData(0.0, 1.0)]
    [InlineData(0.9e9, 0.25)]
    [InlineData(-2.2e9, 0.5)]
    public void SingleLineMatchesDirectAiryEvaluation(double lineHz, double stepInLinewidths)
    {
        // One grid line at νⱼ seen through a sweep with origin φ: the model must equal T(νⱼ − φ − f(xᵢ)) at every
        // sample. Both the fold and the sampling interpolate linearly on the periodic grid (step lw/20 here, as
        // the unfolder uses), so agreement within 1 % of the peak is expected (the quadratic interpolation error
        // of a Lorentzian peak at h = lw/20 is about 0.25 % per step).
        var fsr = Cavity.FsrHz;
        var lw = Cavity.LinewidthHz;
        var rng = new Random(9);
        var step = stepInLinewidths * lw;
        var grid = new FrequencyGrid(lineHz - 200 * step + 0.3 * step, step, 400);
        var j = 200;
        var scan = RandomScan(rng, 6000, fsr, 4.5);
        const double phi = 0.1234e9;
        var op = new SweepOperator(Cavity, scan, grid, phi, Math.Min(step / 2, lw / 20));
        var s = new double[grid.Count];
        s[j] = 1;
        var y = op.Forward(s);
        var worst = 0.0;
        for (var i = 0; i < scan.Length; i++)
        {
            var direct = Airy.Transmission(grid[j] - phi - scan[i], fsr, Cavity.Finesse);
            worst = Math.Max(worst, Math.Abs(y[i] - direct));
        }

        Assert.True(worst < 0.01, $"largest difference {worst:G3} of the peak");
        // and the peaks sit where the Airy function puts them: the sample of largest model value is within
        // a few periodic steps of a transmission maximum
        var imax = Array.IndexOf(y, y.Max());
        Assert.True(Airy.Transmission(grid[j] - phi - scan[imax], fsr, Cavity.Finesse) > 0.95);
    }

    [Fact]
    public void OffsetShiftsTheModelLikeTheScan()
    {
        // Shifting the origin φ by δ equals shifting every scan position by δ (y depends on ν − φ − f(x)).
        var rng = new Random(12);
        var fsr = Cavity.FsrHz;
        var grid = new FrequencyGrid(-1e9, 2.5e6, 800);
        var s = new double[grid.Count];
        s[100] = 1;
        s[517] = 0.4;
        var scan = RandomScan(rng, 3000, fsr, 3);
        var periodic = fsr / 4096; // exact multiple of the periodic step, so both forms land on the same points
        const double delta = 37 * 1.498962290e9 / 4096;
        var a = new SweepOperator(Cavity, scan, grid, 0.2e9 + delta, periodic).Forward(s);
        var b = new SweepOperator(Cavity, scan.Select(v => v + delta).ToArray(), grid, 0.2e9, periodic).Forward(s);
        for (var i = 0; i < a.Length; i++) Assert.Equal(a[i], b[i], 1e-6);

        // SetOffset gives the same as building anew
        var op = new SweepOperator(Cavity, scan, grid, 0, periodic);
        op.SetOffset(0.2e9 + delta);
        Assert.Equal(0.2e9 + delta, op.OffsetHz);
        var c = op.Forward(s);
        for (var i = 0; i < a.Length; i++) Assert.Equal(a[i], c[i], 1e-12);
    }

    [Fact]
    public void PeriodicGridIsAPowerOfTwoFinerThanRequested()
    {
        var grid = new FrequencyGrid(0, 1e6, 10);
        var op = new SweepOperator(Cavity, [0.0, 1e9, 2e9], grid, 0, 0.5e6);
        Assert.True((op.M & (op.M - 1)) == 0);
        Assert.True(op.StepHz <= 0.5e6);
        Assert.Equal(Cavity.FsrHz, op.M * op.StepHz, 1e-3);
        Assert.Equal(3, op.SampleCount);
    }
}
