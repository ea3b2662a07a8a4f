using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using Xunit;

namespace OrderUnfold.Tests.Inversion;

/// <summary>
/// The normal equations of the joint problem against the same products built step by step from
/// <see cref="SweepOperator.Forward"/> and <see cref="SweepOperator.AdjointAdd"/>: whitened rows
/// (gain/σ)·A_k s + b_k for each sweep k, unknowns (s, b). Random (simulated) scans, signals and spectra.
/// </summary>
public class UnfoldProblemTests
{
    private static readonly Instrument A = Instrument.FromLength("A", 0.1, CavityGeometry.Planar, 150);
    private static readonly Instrument B = Instrument.FromLength("B", 0.0937, CavityGeometry.Planar, 120);
    private const double PeriodicStep = 1e6;

    private sealed record Case(CalibratedSweep[] Sweeps, FrequencyGrid Grid, double[] Offsets, double[] Gains);

    private static Case MakeCase(int seed)
    {
        var rng = new Random(seed);
        var grid = new FrequencyGrid(-2e9, 3e6, 700);
        var specs = new[] { (A, 900, 0.01), (B, 1300, 0.02), (A, 600, 0.015) };
        var sweeps = specs.Select((t, k) =>
        {
            var (inst, m, sigma) = t;
            var start = rng.NextDouble() * inst.FsrHz;
            var scan = Enumerable.Range(0, m).Select(i => start + 3.3 * inst.FsrHz * i / (m - 1.0)).ToArray();
            var signal = Enumerable.Range(0, m).Select(_ => 0.1 + rng.NextDouble()).ToArray();
            return new CalibratedSweep($"s{k}", inst, scan, signal, sigma);
        }).ToArray();
        return new Case(sweeps, grid, [0.0, 0.31e9, -0.77e9], [1.0, 0.8, 1.3]);
    }

    /// <summary>G x built from the operator steps: Σ_k [c_k A_kᵀ(c_k A_k s + b_k 1); 1ᵀ(c_k A_k s + b_k 1)] + μ DᵀD s.</summary>
    private static double[] Reference(Case c, double[] x, double mu)
    {
        var n = c.Grid.Count;
        var result = new double[x.Length];
        for (var k = 0; k < c.Sweeps.Length; k++)
        {
            var sw = c.Sweeps[k];
            var op = new SweepOperator(sw.Instrument, sw.ScanHz, c.Grid, c.Offsets[k], PeriodicStep);
            var scale = c.Gains[k] / sw.NoiseSigma;
            var row = op.Forward(x.AsSpan(0, n));
            for (var i = 0; i < row.Length; i++) row[i] = scale * row[i] + x[n + k];
            op.AdjointAdd(row, result.AsSpan(0, n), scale);
            result[n + k] = row.Sum();
        }

        for (var j = 0; j < n; j++)
        {
            if (j > 0) result[j] += mu * (x[j] - x[j - 1]);
            if (j < n - 1) result[j] += mu * (x[j] - x[j + 1]);
        }

        return result;
    }

    private static UnfoldProblem Problem(Case c, double lambda, double mu) =>
        new(c.Sweeps, c.Grid, c.Offsets, c.Gains, lambda, mu, PeriodicStep);

    private static double Norm(IEnumerable<double> v) => Math.Sqrt(v.Sum(a => a * a));

    [Theory]
    [InlineData(1, 0.0)]
    [InlineData(2, 0.0)]
    [InlineData(3, 0.35)]
    public void MultiplyEqualsAdjointOfForward(int seed, double mu)
    {
        var c = MakeCase(seed);
        var p = Problem(c, 0.7, mu);
        var rng = new Random(seed + 100);
        Assert.Equal(c.Grid.Count + c.Sweeps.Length, p.Count);
        for (var trial = 0; trial < 3; trial++)
        {
            // a sparse nonnegative spectrum (as the solver sees) and then a dense signed one
            var x = new double[p.Count];
            for (var j = 0; j < c.Grid.Count; j++) x[j] = trial == 0 ? (rng.NextDouble() < 0.02 ? rng.NextDouble() : 0) : rng.NextDouble() - 0.5;
            for (var k = 0; k < c.Sweeps.Length; k++) x[c.Grid.Count + k] = rng.NextDouble() * 10 - 5;
            var expected = Reference(c, x, mu);
            var got = new double[p.Count];
            p.Multiply(x, got);
            var diff = Norm(expected.Zip(got, (a, b) => a - b));
            Assert.True(diff <= 1e-10 * Norm(expected), $"|Gx − ref| = {diff:G3}, |ref| = {Norm(expected):G3}");
        }
    }

    [Theory]
    [InlineData(5, 0.0)]
    [InlineData(6, 0.2)]
    public void MultiplyEqualsAdjointOfForwardWithTwoSweeps(int seed, double mu)
    {
        // two sweeps take the written-out one-pass transpose of the fold (SweepOperator.FoldTransposeAll)
        var full = MakeCase(seed);
        var c = full with { Sweeps = full.Sweeps[..2], Offsets = full.Offsets[..2], Gains = full.Gains[..2] };
        var p = Problem(c, 0.4, mu);
        var rng = new Random(seed + 200);
        for (var trial = 0; trial < 2; trial++)
        {
            var x = new double[p.Count];
            for (var j = 0; j < c.Grid.Count; j++) x[j] = trial == 0 ? (rng.NextDouble() < 0.03 ? rng.NextDouble() : 0) : rng.NextDouble() - 0.5;
            for (var k = 0; k < 2; k++) x[c.Grid.Count + k] = rng.NextDouble() * 10 - 5;
            var expected = Reference(c, x, mu);
            var got = new double[p.Count];
            p.Multiply(x, got);
            var diff = Norm(expected.Zip(got, (a, b) => a - b));
            Assert.True(diff <= 1e-10 * Norm(expected), $"|Gx − ref| = {diff:G3}, |ref| = {Norm(expected):G3}");
        }
    }

    [Fact]
    public void RightHandSideIsWhitenedAdjointOfTheSignalMinusTheL1Weight()
    {
        var c = MakeCase(4);
        const double lambda = 2.5;
        var p = Problem(c, lambda, 0);
        var n = c.Grid.Count;
        var expected = new double[p.Count];
        for (var k = 0; k < c.Sweeps.Length; k++)
        {
            var sw = c.Sweeps[k];
            var op = new SweepOperator(sw.Instrument, sw.ScanHz, c.Grid, c.Offsets[k], PeriodicStep);
            var yw = sw.Signal.Select(v => v / sw.NoiseSigma).ToArray();
            op.AdjointAdd(yw, expected.AsSpan(0, n), c.Gains[k] / sw.NoiseSigma);
            expected[n + k] = yw.Sum();
        }

        for (var j = 0; j < n; j++) expected[j] -= lambda;
        var rhs = p.RightHandSide.ToArray();
        for (var i = 0; i < rhs.Length; i++) Assert.Equal(expected[i], rhs[i], 1e-9 * (1 + Math.Abs(expected[i])));
        Assert.Equal(lambda, p.L1Weight);
        Assert.False(p.IsFree(0));
        Assert.False(p.IsFree(n - 1));
        Assert.True(p.IsFree(n));
        Assert.True(p.IsFree(n + 2));
    }

    [Theory]
    [InlineData(0.0)]
    [InlineData(0.35)]
    public void ColumnEqualsMultiplyByAUnitVector(double mu)
    {
        var c = MakeCase(5);
        var p = Problem(c, 1.0, mu);
        var n = c.Grid.Count;
        var rng = new Random(6);
        var columns = new[] { 0, 1, 2, 137, 350, n - 2, n - 1, n, n + 1, n + 2 };
        foreach (var j in columns)
        {
            var e = new double[p.Count];
            e[j] = 1;
            var full = new double[p.Count];
            p.Multiply(e, full);
            // rows: neighbours (smoothness couples them), random bins and every background row, never j itself
            var rows = new List<int>();
            for (var i = j - 2; i <= j + 2; i++) if (i >= 0 && i < n && i != j) rows.Add(i);
            for (var t = 0; t < 40; t++)
            {
                var i = rng.Next(n);
                if (i != j && !rows.Contains(i)) rows.Add(i);
            }

            for (var k = 0; k < c.Sweeps.Length; k++) if (n + k != j) rows.Add(n + k);
            var result = new double[rows.Count];
            p.Column(j, rows, result, out var diagonal);
            var scale = Norm(full);
            Assert.Equal(full[j], diagonal, 1e-10 * scale);
            for (var r = 0; r < rows.Count; r++)
                Assert.True(Math.Abs(full[rows[r]] - result[r]) <= 1e-10 * scale, $"column {j}, row {rows[r]}: {result[r]} vs {full[rows[r]]}");
        }
    }

    [Fact]
    public void ColumnNormSquaredIsTheWhitenedColumnNormWithoutPenalty()
    {
        var c = MakeCase(7);
        var p = Problem(c, 1.0, 0.5);
        foreach (var j in new[] { 0, 250, 699 })
        {
            var e = new double[c.Grid.Count];
            e[j] = 1;
            var expected = 0.0;
            for (var k = 0; k < c.Sweeps.Length; k++)
            {
                var sw = c.Sweeps[k];
                var a = new SweepOperator(sw.Instrument, sw.ScanHz, c.Grid, c.Offsets[k], PeriodicStep).Forward(e);
                var scale = c.Gains[k] / sw.NoiseSigma;
                expected += a.Sum(v => scale * scale * v * v);
            }

            Assert.Equal(expected, p.ColumnNormSquared(j), expected * 1e-10);
        }
    }

    [Fact]
    public void ModelAppliesGainAndBackgroundInSignalUnits()
    {
        var c = MakeCase(8);
        var p = Problem(c, 0, 0);
        var n = c.Grid.Count;
        var x = new double[p.Count];
        x[100] = 0.6;
        x[420] = 0.25;
        x[n] = 3;      // whitened background of sweep 0
        x[n + 1] = -2;
        var models = p.Model(x);
        for (var k = 0; k < c.Sweeps.Length; k++)
        {
            var sw = c.Sweeps[k];
            var a = new SweepOperator(sw.Instrument, sw.ScanHz, c.Grid, c.Offsets[k], PeriodicStep).Forward(x.AsSpan(0, n));
            Assert.Equal(a, p.ForwardUnscaled(k, x.AsSpan(0, n)));
            for (var i = 0; i < a.Length; i++)
                Assert.Equal(c.Gains[k] * a[i] + x[n + k] * sw.NoiseSigma, models[k][i], 1e-12);
        }
    }
}
