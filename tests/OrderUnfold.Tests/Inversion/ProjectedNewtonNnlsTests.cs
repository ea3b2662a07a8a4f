using CsCheck;
using OrderUnfold.Benchmarks;
using OrderUnfold.Inversion;
using Xunit;
using static OrderUnfold.Tests.Inversion.ActiveSetNnlsTests;

namespace OrderUnfold.Tests.Inversion;

/// <summary>
/// The projected Newton solver against the brute-force reference of <see cref="ActiveSetNnlsTests"/> on small random
/// (simulated) problems, and the Toeplitz preconditioner it runs with on the unfolding problem: Durbin's recursion and
/// the Gohberg–Semencul inverse against direct products with the Toeplitz matrix, and the Toeplitz model against the
/// problem's own normal matrix (SIMULATED DATA: the dense-support case of the benchmarks).
/// </summary>
public class ProjectedNewtonNnlsTests
{
    private static readonly DenseNnls.Options Exact = new() { Tolerance = 1e-9, RelativeTolerance = 0, MaxProducts = 100_000 };

    /// <summary>The identity as a preconditioner: the solver's logic alone, without help from the preconditioner.</summary>
    private sealed class Identity : INormalPreconditioner
    {
        public void Precondition(ReadOnlySpan<double> r, Span<double> z) => r.CopyTo(z);
    }

    [Fact]
    public void MatchesBruteForceOnSmallRandomProblems()
    {
        var gen = Gen.Select(Gen.Int[0, int.MaxValue], Gen.Int[1, 8], Gen.Int[0, 3], Gen.Int[0, 2]);
        gen.Sample((seed, n, freeCount, lambdaChoice) =>
        {
            var lambda = lambdaChoice switch { 0 => 0.0, 1 => 0.5, _ => 3.0 };
            var eq = RandomProblem(seed, n, Math.Min(freeCount, n), lambda);
            var expected = eq.BruteForce();
            var result = ProjectedNewtonNnls.Solve(eq, new Identity(), Exact, default, "identity");
            Assert.True(result.Status == SolverStatus.Converged, $"seed {seed}: {result.Message}");
            Assert.True(result.KktViolation <= 1e-9, $"seed {seed}: KKT {result.KktViolation}");
            var scale = Math.Max(1, expected.Max(Math.Abs));
            for (var j = 0; j < n; j++)
            {
                Assert.True(Math.Abs(expected[j] - result.Solution[j]) <= 1e-7 * scale, $"seed {seed}, entry {j}: {expected[j]:R} vs {result.Solution[j]:R}");
                if (!eq.IsFree(j)) Assert.True(result.Solution[j] >= 0);
            }
        }, iter: 200, threads: 1);
    }

    [Fact]
    public void DurbinGivesTheFirstColumnOfTheInverse()
    {
        // a positive definite Toeplitz matrix (diagonally dominant: t₀ exceeds the sum of |t_d| over both sides)
        var n = 40;
        var t = Enumerable.Range(0, n).Select(d => d == 0 ? 0.0 : Math.Exp(-d / 4.0) * Math.Cos(0.7 * d)).ToArray();
        t[0] = 1 + 2 * t.Sum(Math.Abs);
        var x = ToeplitzRecursions.InverseFirstColumn(t)!;
        for (var i = 0; i < n; i++)
        {
            var s = 0.0;
            for (var j = 0; j < n; j++) s += t[Math.Abs(i - j)] * x[j];
            Assert.Equal(i == 0 ? 1 : 0, s, 1e-13);
        }

        // an indefinite one is refused
        Assert.Null(ToeplitzRecursions.InverseFirstColumn([1.0, 1.5, 0.2]));
    }

    [Fact]
    public void VectorisedDurbinAgreesWithTheScalarRecursion()
    {
        // the same double-double recursion four lanes at a time (other rounding order) against one operation at a time, on
        // the simulated dense-support case's Toeplitz model (condition number near 10⁹) and on odd sizes around the lane width
        var t = ToeplitzPreconditioner.BuildSymbol(DenseSupportCase.Create(4000, 1000).Problem());
        foreach (var size in new[] { 2, 3, 4, 5, 6, 9, 37, t.Length })
        {
            var section = t[..size];
            var scalar = ToeplitzRecursions.InverseFirstColumnScalar(section);
            Assert.NotNull(scalar);
            if (!(System.Runtime.Intrinsics.X86.Fma.IsSupported && System.Runtime.Intrinsics.Vector256.IsHardwareAccelerated)) continue;
            var vector = ToeplitzRecursions.InverseFirstColumnVector(section);
            Assert.NotNull(vector);
            var scale = scalar!.Max(Math.Abs);
            for (var i = 0; i < size; i++)
                Assert.True(Math.Abs(vector![i] - scalar[i]) <= 1e-12 * scale, $"size {size}, entry {i}: {vector[i]:R} against {scalar[i]:R}");
        }

        Assert.Null(ToeplitzRecursions.InverseFirstColumnVector([1.0, 1.5, 0.2]));
    }

    [Fact]
    public void ToeplitzInverseIsAccurateOnTheDenseSupportCase()
    {
        var problem = DenseSupportCase.Create(4000, 1000).Problem();
        var pre = ToeplitzPreconditioner.TryCreate(problem, out var reason);
        Assert.True(pre is not null, reason);
        var t = pre!.Symbol;
        var n = t.Length;
        var rng = new Random(5);
        var r = Enumerable.Range(0, n).Select(_ => rng.NextDouble() - 0.5).ToArray();
        var z = new double[n];
        pre.ApplyToeplitzInverse(r, z);
        var worst = 0.0;
        for (var i = 0; i < n; i++)
        {
            var s = 0.0;
            for (var j = 0; j < n; j++) s += t[Math.Abs(i - j)] * z[j];
            worst = Math.Max(worst, Math.Abs(s - r[i]));
        }

        Assert.True(worst <= 1e-9 * r.Max(Math.Abs), $"T (T⁻¹ r) − r up to {worst:G3}");
    }

    [Fact]
    public void PreconditionerColumnsByTheTrenchRecurrenceMatchTheFullProduct()
    {
        // columns P e_j walked from the anchor columns (Trench's recurrence) against the four-FFT product of a unit vector,
        // at both ends, next to anchors and halfway between them (simulated dense-support case)
        var problem = DenseSupportCase.Create(4000, 1000).Problem();
        var pre = ToeplitzPreconditioner.TryCreate(problem, out var reason);
        Assert.True(pre is not null, reason);
        var count = problem.Count;
        var n = problem.Grid.Count;
        var unit = new double[count];
        var expected = new double[count];
        var got = new double[count];
        foreach (var j in new[] { 0, 1, 7, 8, 9, 15, 16, 17, 24, 500, 503, 511, n - 9, n - 2, n - 1 })
        {
            unit[j] = 1;
            pre!.Precondition(unit, expected);
            unit[j] = 0;
            pre.Column(j, got);
            var scale = expected.Max(Math.Abs);
            for (var i = 0; i < count; i++)
                Assert.True(Math.Abs(got[i] - expected[i]) <= 1e-9 * scale, $"column {j}, entry {i}: {got[i]:R} against {expected[i]:R}");
        }
    }

    [Fact]
    public void DeletingFromACholeskyFactorGivesTheFactorOfTheReducedMatrix()
    {
        // a random symmetric positive definite matrix (simulated): delete rows/columns 0, 3 and the last from its factor
        // one at a time, and compare L Lᵀ with the matrix without them
        const int m = 9;
        var rng = new Random(11);
        var b = new double[m, m];
        for (var i = 0; i < m; i++)
        for (var j = 0; j < m; j++)
            b[i, j] = rng.NextDouble() - 0.5;
        var a = new double[m, m];
        for (var i = 0; i < m; i++)
        for (var j = 0; j < m; j++)
        {
            var s = i == j ? 0.1 : 0.0;
            for (var k = 0; k < m; k++) s += b[i, k] * b[j, k];
            a[i, j] = s;
        }

        var l = new double[m * m];
        for (var i = 0; i < m; i++)
        for (var j = 0; j <= i; j++)
        {
            var s = a[i, j];
            for (var k = 0; k < j; k++) s -= l[i * m + k] * l[j * m + k];
            l[i * m + j] = i == j ? Math.Sqrt(s) : s / l[j * m + j];
        }

        var keep = Enumerable.Range(0, m).ToList();
        var work = new double[m];
        var size = m;
        foreach (var position in new[] { m - 1, 3, 0 })
        {
            ProjectedNewtonNnls.DeleteFromFactor(l, m, size--, position, work);
            keep.RemoveAt(position);
            for (var i = 0; i < size; i++)
            for (var j = 0; j <= i; j++)
            {
                var s = 0.0;
                for (var k = 0; k <= j; k++) s += l[i * m + k] * l[j * m + k];
                Assert.Equal(a[keep[i], keep[j]], s, 1e-12);
            }
        }
    }

    [Fact]
    public void ToeplitzModelFollowsTheNormalMatrix()
    {
        // the grid block's Schur complement (backgrounds eliminated) in a middle column, against the Toeplitz entries
        var problem = DenseSupportCase.Create(4000, 1000).Problem();
        var n = problem.Grid.Count;
        var t = ToeplitzPreconditioner.BuildSymbol(problem);
        var rows = Enumerable.Range(0, problem.Count).ToList();
        var j = n / 2;
        var column = new double[problem.Count];
        problem.Column(j, rows, column, out _);
        for (var k = 0; k < problem.SweepCount; k++)
        {
            var background = new double[problem.Count];
            problem.Column(n + k, rows, background, out var diagonal);
            var f = column[n + k] / diagonal;
            for (var i = 0; i < n; i++) column[i] -= background[i] * f;
        }

        for (var d = 0; j + d < n; d++)
            Assert.True(Math.Abs(column[j + d] - t[d]) <= 5e-3 * t[0], $"lag {d}: normal matrix {column[j + d]:G6}, Toeplitz model {t[d]:G6}");
    }
}
