using System.Globalization;
using CsCheck;
using OrderUnfold.Benchmarks;
using OrderUnfold.Inversion;
using Xunit;
using static OrderUnfold.Tests.Inversion.ActiveSetNnlsTests;

namespace OrderUnfold.Tests.Inversion;

/// <summary>
/// The dense-support solver (gradient projection with conjugate gradients) against the brute-force reference of
/// <see cref="ActiveSetNnlsTests"/> on small random (simulated) problems, on a realistic dense case against scipy's
/// objective (tests/reference/dense_nnls_reference.txt, written by tests/reference/dense_nnls_reference.py with
/// scipy.optimize.nnls), and the automatic choice between the two solvers.
/// </summary>
public class DenseNnlsTests
{
    private static readonly DenseNnls.Options Exact = new() { Tolerance = 1e-9, RelativeTolerance = 0, MaxProducts = 100_000 };

    [Fact]
    public void MatchesBruteForceOnSmallRandomProblems()
    {
        var gen = Gen.Select(Gen.Int[0, int.MaxValue], Gen.Int[1, 8], Gen.Int[0, 3], Gen.Int[0, 2]);
        gen.Sample((seed, n, freeCount, lambdaChoice) =>
        {
            var lambda = lambdaChoice switch { 0 => 0.0, 1 => 0.5, _ => 3.0 };
            var eq = RandomProblem(seed, n, Math.Min(freeCount, n), lambda);
            var expected = eq.BruteForce();
            var result = DenseNnls.Solve(eq, Exact);
            Assert.True(result.Status == SolverStatus.Converged, $"seed {seed}: {result.Message}");
            Assert.Equal(NnlsMethod.Dense, result.Method);
            Assert.True(result.KktViolation <= 1e-9, $"seed {seed}: KKT {result.KktViolation}");
            var scale = Math.Max(1, expected.Max(Math.Abs));
            for (var j = 0; j < n; j++)
            {
                Assert.True(Math.Abs(expected[j] - result.Solution[j]) <= 1e-7 * scale, $"seed {seed}, entry {j}: {expected[j]:R} vs {result.Solution[j]:R}");
                if (!eq.IsFree(j)) Assert.True(result.Solution[j] >= 0);
            }

            Assert.Equal(eq.Objective(expected), eq.Objective(result.Solution), 1e-9 * Math.Max(1, Math.Abs(eq.Objective(expected))));
        }, iter: 200, threads: 1);
    }

    [Fact]
    public void WarmStartFromAnyPointGivesTheSameAnswer()
    {
        var gen = Gen.Select(Gen.Int[0, int.MaxValue], Gen.Int[2, 8], Gen.Int[0, 2]);
        gen.Sample((seed, n, freeCount) =>
        {
            var eq = RandomProblem(seed, n, freeCount, 0.2);
            var expected = eq.BruteForce();
            var rng = new Random(seed ^ 0x3c3c);
            var start = Enumerable.Range(0, n).Select(_ => rng.NextDouble() < 0.5 ? 3 * rng.NextDouble() : -1).ToArray();
            var warm = DenseNnls.Solve(eq, Exact, start);
            Assert.Equal(SolverStatus.Converged, warm.Status);
            var scale = Math.Max(1, expected.Max(Math.Abs));
            for (var j = 0; j < n; j++) Assert.True(Math.Abs(expected[j] - warm.Solution[j]) <= 1e-7 * scale);
        }, iter: 100, threads: 1);
    }

    [Fact]
    public void BudgetIsReportedAsIterationLimit()
    {
        var eq = RandomProblem(7, 8, 1, 0);
        var r = DenseNnls.Solve(eq, Exact with { MaxProducts = 3 });
        Assert.Equal(SolverStatus.IterationLimit, r.Status);
        Assert.Contains("KKT violation", r.Message);
        Assert.True(r.KktViolation > 1e-9);
    }

    /// <summary>
    /// The 4000-sample × 1000-bin dense-support case of the benchmarks (broadband simulated source, no L1 weight, light
    /// smoothness): the solver converges with more than 90 % of the bins positive, its objective equals scipy's
    /// (scipy.optimize.nnls on the exported dense matrix, tests/reference/dense_nnls_reference.txt) within 10⁻⁶
    /// relative, and the KKT conditions hold when checked with a gradient built from the operator's forward and
    /// adjoint steps (not from the normal-equation product the solver used).
    /// </summary>
    [Fact]
    public void RealisticDenseCaseMatchesScipyAndSatisfiesKkt()
    {
        var c = DenseSupportCase.Create(4000, 1000);
        var problem = c.Problem();
        var r = DenseNnls.Solve(problem);
        Assert.Equal(SolverStatus.Converged, r.Status);
        Assert.Contains("projected Newton, Toeplitz preconditioner", r.Message);
        Assert.True(r.KktViolation <= r.Tolerance, $"KKT {r.KktViolation} > {r.Tolerance}");
        var positive = r.Solution.Take(1000).Count(v => v > 0);
        Assert.True(positive > 900, $"only {positive} of 1000 bins positive: not a dense-support case");

        var reference = ReadReference()["4000x1000"];
        var objective = c.Objective(problem, r.Solution);
        Assert.True(Math.Abs(objective - reference) <= 1e-6 * reference, $"objective {objective:R} vs scipy {reference:R}");

        // independent KKT check: gradient of ½‖(A s + b − y)/σ‖² + ½μ‖Ds‖² by the forward model and the operators' adjoints
        var n = problem.Grid.Count;
        var grad = new double[n];
        var models = problem.Model(r.Solution);
        for (var k = 0; k < c.Sweeps.Count; k++)
        {
            var sw = c.Sweeps[k];
            var op = problem.Operators[k];
            var resid = sw.Signal.Select((y, i) => (models[k][i] - y) / (sw.NoiseSigma * sw.NoiseSigma) * c.Gains[k]).ToArray();
            op.AdjointAdd(resid, grad);
            var bgGrad = resid.Sum() / c.Gains[k] * sw.NoiseSigma;
            Assert.True(Math.Abs(bgGrad) <= 10 * r.Tolerance, $"background {k}: gradient {bgGrad}");
        }

        var mu = problem.SmoothnessWeight;
        var s = r.Solution;
        for (var j = 0; j < n; j++)
        {
            if (j > 0) grad[j] += mu * (s[j] - s[j - 1]);
            if (j < n - 1) grad[j] += mu * (s[j] - s[j + 1]);
            var violation = s[j] > 0 ? Math.Abs(grad[j]) : Math.Max(0, -grad[j]);
            Assert.True(violation <= 10 * r.Tolerance, $"bin {j}: x {s[j]:G3}, gradient {grad[j]:G3}, tolerance {r.Tolerance:G3}");
        }
    }

    /// <summary>
    /// The 8k × 2k dense-support case (SIMULATED DATA), where the converged unconstrained Newton direction projects uphill at
    /// every step length (the first step used to leave every bin at zero): the projected Newton method converges by itself,
    /// without the gradient-projection fallback, to scipy's objective (tests/reference/dense_nnls_reference.txt) within
    /// 10⁻⁶ relative. The product count guards the first step along the conjugate-gradient path (74 products on x86-64;
    /// 259 before it), with a wide margin for other rounding.
    /// </summary>
    [Fact]
    public void LargerDenseCaseConvergesWithoutTheFallback()
    {
        var c = DenseSupportCase.Create(8000, 2000);
        var problem = c.Problem();
        var r = DenseNnls.Solve(problem);
        Assert.Equal(SolverStatus.Converged, r.Status);
        Assert.StartsWith("KKT conditions hold (projected Newton, Toeplitz preconditioner", r.Message);
        Assert.True(r.KktViolation <= r.Tolerance, $"KKT {r.KktViolation} > {r.Tolerance}");
        Assert.True(r.Products <= 150, r.Message);
        var reference = ReadReference()["8000x2000"];
        var objective = c.Objective(problem, r.Solution);
        Assert.True(Math.Abs(objective - reference) <= 1e-6 * reference, $"objective {objective:R} vs scipy {reference:R}");
    }

    [Fact]
    public void AutomaticChoiceFollowsTheProblemShapeAndTheSupport()
    {
        var c = DenseSupportCase.Create(4000, 1000);
        var asOptions = new ActiveSetNnls.Options { Tolerance = 1e-3, MaxIterations = 5000 };

        // smoothness weight on: dense support expected, the dense solver runs from the start
        var plain = c.Problem();
        var r0 = NnlsSolver.Solve(plain, SolverChoice.Auto, asOptions, plain.L1Weight, plain.SmoothnessWeight);
        Assert.Equal(NnlsMethod.Dense, r0.Method);
        Assert.Contains("smoothness weight on", r0.Reason);
        Assert.Equal(SolverStatus.Converged, r0.Status);

        // the unfolder's default L1 weight (sparsity 3 × the middle column's norm) on a broadband source: the active set
        // starts, its support passes the limit, it hands over
        var weighted = c.Problem(0).WithPenalties(3 * Math.Sqrt(plain.ColumnNormSquared(500)), 0);
        var r1 = NnlsSolver.Solve(weighted, SolverChoice.Auto, asOptions, weighted.L1Weight, weighted.SmoothnessWeight, handover: true);
        Assert.Contains("handed over", r1.Reason);
        Assert.True(r1.Status == SolverStatus.Converged, r1.Reason + ": " + r1.Message);
        Assert.True(r1.KktViolation <= asOptions.Tolerance * 1.0001 || r1.KktViolation <= r1.Tolerance, $"KKT {r1.KktViolation}");
        Assert.True(r1.ActiveCount > NnlsSolver.HandoverCount(weighted.Count));

        // forced choices are honoured and say so
        var forced = NnlsSolver.Solve(RandomProblem(3, 6, 1, 0.5), SolverChoice.ActiveSet, new ActiveSetNnls.Options(), 0.5, 0);
        Assert.Equal(NnlsMethod.ActiveSet, forced.Method);
        Assert.Equal("active set requested", forced.Reason);
    }

    [Fact]
    public void LineSpectrumKeepsTheActiveSet()
    {
        // a sparse problem with an L1 weight stays with the active set and gives its exact answer
        var eq = RandomProblem(11, 8, 1, 3.0);
        var r = NnlsSolver.Solve(eq, SolverChoice.Auto, new ActiveSetNnls.Options(), 3.0, 0);
        Assert.Equal(NnlsMethod.ActiveSet, r.Method);
        Assert.Equal("no smoothness weight: sparse support expected", r.Reason);
        Assert.Equal(ActiveSetNnls.Solve(eq).Solution, r.Solution);
    }

    /// <summary>Objective values of scipy.optimize.nnls per problem size, from the committed reference output.</summary>
    internal static Dictionary<string, double> ReadReference()
    {
        var dir = new DirectoryInfo(AppContext.BaseDirectory);
        while (dir is not null && !File.Exists(Path.Combine(dir.FullName, "tests", "reference", "dense_nnls_reference.txt"))) dir = dir.Parent;
        Assert.True(dir is not null, "tests/reference/dense_nnls_reference.txt not found");
        var result = new Dictionary<string, double>();
        foreach (var line in File.ReadAllLines(Path.Combine(dir!.FullName, "tests", "reference", "dense_nnls_reference.txt")))
        {
            if (line.StartsWith('#') || line.StartsWith("size")) continue;
            var f = line.Split('\t');
            if (f.Length > 4) result[f[0]] = double.Parse(f[4], CultureInfo.InvariantCulture);
        }

        return result;
    }
}
