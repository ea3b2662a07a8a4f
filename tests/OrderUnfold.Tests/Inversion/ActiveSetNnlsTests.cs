using CsCheck;
using MathNet.Numerics.LinearAlgebra;
using OrderUnfold.Inversion;
using Xunit;

namespace OrderUnfold.Tests.Inversion;

/// <summary>
/// Lawson–Hanson NNLS against an independent brute-force solution on small random (simulated) problems. The
/// brute force enumerates every support S of the constrained entries, solves the unconstrained least-squares
/// problem on S ∪ free by QR of the dense matrix (MathNet.Numerics), keeps the feasible ones (x_S ≥ 0) and takes
/// the smallest objective. For a full-column-rank A the NNLS optimum is the unconstrained optimum on its own
/// support, so this finds it exactly.
/// </summary>
public class ActiveSetNnlsTests
{
    /// <summary>Normal equations of min ½‖Ax − b‖² + λ·Σ_{constrained} x, from a dense A (test-only adapter).</summary>
    internal sealed class DenseNormalEquations : INormalEquations
    {
        private readonly Matrix<double> _g;
        private readonly double[] _rhs;
        private readonly bool[] _free;

        public DenseNormalEquations(Matrix<double> a, Vector<double> b, bool[] free, double lambda = 0)
        {
            A = a;
            B = b;
            _free = free;
            Lambda = lambda;
            _g = a.TransposeThisAndMultiply(a);
            _rhs = a.TransposeThisAndMultiply(b).ToArray();
            for (var j = 0; j < _rhs.Length; j++) if (!free[j]) _rhs[j] -= lambda;
            MultiplyCalls = 0;
        }

        public Matrix<double> A { get; }
        public Vector<double> B { get; }
        public double Lambda { get; }
        public int MultiplyCalls { get; private set; }
        public int Count => _rhs.Length;
        public ReadOnlySpan<double> RightHandSide => _rhs;
        public bool IsFree(int j) => _free[j];

        public void Multiply(ReadOnlySpan<double> x, Span<double> result)
        {
            MultiplyCalls++;
            for (var i = 0; i < Count; i++)
            {
                var s = 0.0;
                for (var j = 0; j < Count; j++) s += _g[i, j] * x[j];
                result[i] = s;
            }
        }

        public void Column(int j, IReadOnlyList<int> rows, Span<double> result, out double diagonal)
        {
            for (var r = 0; r < rows.Count; r++) result[r] = _g[rows[r], j];
            diagonal = _g[j, j];
        }

        /// <summary>½‖Ax − b‖² + λ Σ_{constrained} x.</summary>
        public double Objective(double[] x)
        {
            var r = A * Vector<double>.Build.DenseOfArray(x) - B;
            var l1 = 0.0;
            for (var j = 0; j < x.Length; j++) if (!_free[j]) l1 += x[j];
            return 0.5 * r.DotProduct(r) + Lambda * l1;
        }

        /// <summary>The exact optimum by enumerating supports.</summary>
        public double[] BruteForce()
        {
            var n = Count;
            var constrained = Enumerable.Range(0, n).Where(j => !_free[j]).ToArray();
            var freeIdx = Enumerable.Range(0, n).Where(j => _free[j]).ToArray();
            double[]? best = null;
            var bestObjective = double.PositiveInfinity;
            for (var mask = 0; mask < 1 << constrained.Length; mask++)
            {
                var support = freeIdx.Concat(constrained.Where((_, k) => (mask >> k & 1) == 1)).ToArray();
                var x = new double[n];
                if (support.Length > 0)
                {
                    // min ½‖A_S z − b‖² + λ Σ z_c  ⇔  least squares on the augmented right-hand side:
                    // A_Sᵀ A_S z = A_Sᵀ b − λ e_c. Solve through QR of A_S: z = R⁻¹ (Qᵀ b − R⁻ᵀ λ e_c).
                    var aS = Matrix<double>.Build.Dense(A.RowCount, support.Length, (i, k) => A[i, support[k]]);
                    var qr = aS.QR(MathNet.Numerics.LinearAlgebra.Factorization.QRMethod.Thin);
                    var penalty = Vector<double>.Build.Dense(support.Length, k => _free[support[k]] ? 0 : Lambda);
                    var w = qr.R.Transpose().Solve(penalty);           // R⁻ᵀ λ e_c
                    var z = qr.R.Solve(qr.Q.TransposeThisAndMultiply(B) - w);
                    if (support.Where((j, k) => !_free[j] && z[k] < 0).Any()) continue;
                    for (var k = 0; k < support.Length; k++) x[support[k]] = z[k];
                }

                var obj = Objective(x);
                if (obj < bestObjective)
                {
                    bestObjective = obj;
                    best = x;
                }
            }

            return best!;
        }
    }

    /// <summary>A random well-conditioned problem whose unconstrained optimum has negative entries, so that the
    /// bounds bite. Rows ≥ 2n + 4 keep the Gaussian matrix well conditioned.</summary>
    internal static DenseNormalEquations RandomProblem(int seed, int n, int freeCount, double lambda)
    {
        var rng = new Random(seed);
        var m = 2 * n + 4 + rng.Next(8);
        var a = Matrix<double>.Build.Dense(m, n, (_, _) => OrderUnfold.Simulation.Simulator.Gaussian(rng));
        var xTrue = Vector<double>.Build.Dense(n, _ => OrderUnfold.Simulation.Simulator.Gaussian(rng));
        var b = a * xTrue + Vector<double>.Build.Dense(m, _ => 0.3 * OrderUnfold.Simulation.Simulator.Gaussian(rng));
        var free = new bool[n];
        foreach (var j in Enumerable.Range(0, n).OrderBy(_ => rng.Next()).Take(freeCount)) free[j] = true;
        return new DenseNormalEquations(a, b, free, lambda);
    }

    private static void AssertClose(double[] expected, double[] actual, double tol, string what)
    {
        var scale = Math.Max(1, expected.Max(Math.Abs));
        for (var j = 0; j < expected.Length; j++)
            Assert.True(Math.Abs(expected[j] - actual[j]) <= tol * scale,
                $"{what}: entry {j}: expected {expected[j]:R}, got {actual[j]:R} (all: [{string.Join(", ", actual.Select(v => v.ToString("G6")))}] vs [{string.Join(", ", expected.Select(v => v.ToString("G6")))}])");
    }

    [Fact]
    public void MatchesBruteForceOnSmallRandomProblems()
    {
        // Property over random problems: 1–8 columns, 0–3 of them free, with and without an L1 weight.
        var gen = Gen.Select(Gen.Int[0, int.MaxValue], Gen.Int[1, 8], Gen.Int[0, 3], Gen.Int[0, 2]);
        gen.Sample((seed, n, freeCount, lambdaChoice) =>
        {
            var lambda = lambdaChoice switch { 0 => 0.0, 1 => 0.5, _ => 3.0 };
            var eq = RandomProblem(seed, n, Math.Min(freeCount, n), lambda);
            var expected = eq.BruteForce();
            var result = ActiveSetNnls.Solve(eq);
            Assert.Equal(SolverStatus.Converged, result.Status);
            AssertClose(expected, result.Solution, 1e-8, $"seed {seed}, n {n}, free {freeCount}, λ {lambda}");
            for (var j = 0; j < n; j++) if (!eq.IsFree(j)) Assert.True(result.Solution[j] >= 0);
            Assert.Equal(Enumerable.Range(0, n).Count(j => eq.IsFree(j) || result.Solution[j] > 0), result.ActiveCount);
        }, iter: 300, threads: 1);
    }

    [Fact]
    public void WarmStartGivesTheSameAnswer()
    {
        var gen = Gen.Select(Gen.Int[0, int.MaxValue], Gen.Int[2, 8], Gen.Int[0, 2]);
        gen.Sample((seed, n, freeCount) =>
        {
            var eq = RandomProblem(seed, n, freeCount, 0.2);
            var cold = ActiveSetNnls.Solve(eq);
            var rng = new Random(seed ^ 0x5a5a);
            // from a random positive start (most entries wrong), from the answer itself, and from a perturbed answer
            var randomStart = Enumerable.Range(0, n).Select(_ => rng.NextDouble() < 0.6 ? rng.NextDouble() * 2 : 0).ToArray();
            var perturbed = cold.Solution.Select(v => v > 0 ? v * (1 + 0.3 * (rng.NextDouble() - 0.5)) : 0).ToArray();
            foreach (var start in new[] { randomStart, cold.Solution, perturbed })
            {
                var warm = ActiveSetNnls.Solve(eq, null, start);
                Assert.Equal(SolverStatus.Converged, warm.Status);
                AssertClose(cold.Solution, warm.Solution, 1e-8, $"seed {seed}: warm start");
            }

            // restarting from the optimum needs no column added
            Assert.Equal(0, ActiveSetNnls.Solve(eq, null, cold.Solution).Iterations);
        }, iter: 150, threads: 1);
    }

    [Fact]
    public void AllNegativeCorrelationsGiveZero()
    {
        // b lies in the negative cone of A's columns: the optimum is x = 0 with gradient Aᵀb ≤ 0
        var a = Matrix<double>.Build.DenseOfArray(new double[,] { { 1, 0 }, { 0, 1 }, { 1, 1 } });
        var b = Vector<double>.Build.DenseOfArray([-1.0, -2.0, -0.5]);
        var eq = new DenseNormalEquations(a, b, [false, false]);
        var r = ActiveSetNnls.Solve(eq);
        Assert.Equal(SolverStatus.Converged, r.Status);
        Assert.Equal([0.0, 0.0], r.Solution);
        Assert.Equal(0, r.ActiveCount);
        Assert.Equal(0, r.Iterations);
    }

    [Fact]
    public void HandWorkedExample()
    {
        // min ½‖Ax − b‖², A = I₂, b = (2, −3): the nonnegative optimum is (2, 0) (worked by hand);
        // with the second entry free it is (2, −3).
        var a = Matrix<double>.Build.DenseIdentity(2);
        var b = Vector<double>.Build.DenseOfArray([2.0, -3.0]);
        AssertClose([2.0, 0.0], ActiveSetNnls.Solve(new DenseNormalEquations(a, b, [false, false])).Solution, 1e-10, "bounded");
        AssertClose([2.0, -3.0], ActiveSetNnls.Solve(new DenseNormalEquations(a, b, [false, true])).Solution, 1e-10, "free");
        // with an L1 weight of 0.5 the positive entry shrinks by 0.5 (soft threshold)
        AssertClose([1.5, 0.0], ActiveSetNnls.Solve(new DenseNormalEquations(a, b, [false, false], 0.5)).Solution, 1e-10, "L1");
    }

    [Fact]
    public void IterationLimitIsReportedAsSuch()
    {
        var eq = RandomProblem(17, 8, 0, 0);
        var full = ActiveSetNnls.Solve(eq);
        Assert.True(full.Iterations >= 2, "the test needs a problem with at least two active columns");
        var r = ActiveSetNnls.Solve(eq, new ActiveSetNnls.Options { MaxIterations = 1 });
        Assert.Equal(SolverStatus.IterationLimit, r.Status);
        Assert.Contains("limit 1", r.Message);
        Assert.True(r.KktViolation > 0);
        Assert.All(r.Solution, v => Assert.True(v >= 0)); // still feasible
    }

    [Fact]
    public void KktViolationIsReportedNearZeroAtConvergence()
    {
        var eq = RandomProblem(23, 8, 2, 0.3);
        var r = ActiveSetNnls.Solve(eq);
        Assert.Equal(SolverStatus.Converged, r.Status);
        Assert.True(r.KktViolation < 1e-9, $"KKT violation {r.KktViolation}");
        // independent check from A and b: gradient of the objective is Aᵀ(b − Ax) − λ on constrained entries
        var x = Vector<double>.Build.DenseOfArray(r.Solution);
        var g = eq.A.TransposeThisAndMultiply(eq.B - eq.A * x);
        for (var j = 0; j < eq.Count; j++)
        {
            var gj = g[j] - (eq.IsFree(j) ? 0 : eq.Lambda);
            if (eq.IsFree(j) || r.Solution[j] > 0) Assert.True(Math.Abs(gj) < 1e-9, $"entry {j}: gradient {gj}");
            else Assert.True(gj < 1e-9, $"entry {j}: gradient {gj} with x = 0");
        }
    }

    [Fact]
    public void DependentColumnsDoNotBreakTheSolver()
    {
        // two identical columns: the optimum value is unique although x is not; the solver must stay finite and
        // reach the same objective as the brute force on the reduced problem
        var rng = new Random(3);
        var a0 = Matrix<double>.Build.Dense(10, 3, (_, _) => OrderUnfold.Simulation.Simulator.Gaussian(rng));
        var a = a0.Append(a0.SubMatrix(0, 10, 0, 1));
        var b = a0 * Vector<double>.Build.DenseOfArray([1.0, 0.5, 0.25]);
        var eq = new DenseNormalEquations(a, b, new bool[4]);
        var r = ActiveSetNnls.Solve(eq);
        Assert.Equal(SolverStatus.Converged, r.Status);
        Assert.All(r.Solution, v => Assert.True(double.IsFinite(v) && v >= 0));
        Assert.True(eq.Objective(r.Solution) < 1e-12);
        Assert.Equal(1.0, r.Solution[0] + r.Solution[3], 1e-8);
    }
}
