using OrderUnfold.Analysis;
using Xunit;

namespace OrderUnfold.Tests.Analysis;

/// <summary>The Levenberg–Marquardt solver on standard least-squares test problems.</summary>
public class LevenbergMarquardtTests
{
    /// <summary>Rosenbrock's function as least squares: r₁ = 10(x₂ − x₁²), r₂ = 1 − x₁, from (−1.2, 1); the minimum is
    /// (1, 1) with χ² = 0 (Moré, Garbow &amp; Hillstrom, "Testing unconstrained optimization software", ACM TOMS 7, 1981,
    /// problem 1; recalled from memory).</summary>
    private sealed class Rosenbrock : ILeastSquaresProblem
    {
        public int Count => 2;

        public double Normal(double[] p, double[] jtj, double[] jtr)
        {
            double x1 = p[0], x2 = p[1];
            double[] r = [10 * (x2 - x1 * x1), 1 - x1];
            // model m = −r with y = 0: J = ∂m/∂p = −∂r/∂p
            double[,] j = { { 20 * x1, -10 }, { 1, 0 } };
            Array.Clear(jtj);
            Array.Clear(jtr);
            for (var i = 0; i < 2; i++)
            for (var a = 0; a < 2; a++)
            {
                jtr[a] += j[i, a] * r[i];
                for (var b = 0; b < 2; b++) jtj[a * 2 + b] += j[i, a] * j[i, b];
            }

            return r[0] * r[0] + r[1] * r[1];
        }
    }

    [Fact]
    public void FindsTheMinimumOfRosenbrocksFunction()
    {
        // a zero-residual problem in unscaled units: the χ² tolerance meant for whitened data (10⁻⁹, far below the Δχ² of 1
        // that one standard error costs) is lowered so that the solver goes on to the exact minimum
        var outcome = LevenbergMarquardt.Minimise(new Rosenbrock(), [-1.2, 1.0], [1, 1], null, 200, chiSquareTolerance: 1e-24);
        Assert.True(outcome.Converged, outcome.Exit.ToString());
        Assert.Equal(1.0, outcome.P[0], 6);
        Assert.Equal(1.0, outcome.P[1], 6);
        Assert.True(outcome.ChiSquare < 1e-12, $"χ² = {outcome.ChiSquare}");

        // with the default tolerance it stops once a step would gain less than 10⁻⁹ in χ², i.e. already very close
        var coarse = LevenbergMarquardt.Minimise(new Rosenbrock(), [-1.2, 1.0], [1, 1], null, 200);
        Assert.True(coarse.Converged, coarse.Exit.ToString());
        Assert.True(coarse.ChiSquare < 1e-8, $"χ² = {coarse.ChiSquare}");
    }

    [Fact]
    public void FixedParametersStayWhereTheyStart()
    {
        // x₂ held at 2: the best x₁ minimises 100(2 − x₁²)² + (1 − x₁)², a root of d/dx₁ = 0 near √2, found by bisection here
        var outcome = LevenbergMarquardt.Minimise(new Rosenbrock(), [1.0, 2.0], [1, 1], [false, true], 200);
        Assert.Equal(2.0, outcome.P[1]);
        static double Slope(double x) => -400 * x * (2 - x * x) - 2 * (1 - x);
        double lo = 1.3, hi = 1.5;
        for (var i = 0; i < 100; i++)
        {
            var mid = 0.5 * (lo + hi);
            if (Slope(lo) * Slope(mid) <= 0) hi = mid;
            else lo = mid;
        }

        Assert.Equal(0.5 * (lo + hi), outcome.P[0], 7);
    }

    [Fact]
    public void StopsAtTheIterationLimit()
    {
        var outcome = LevenbergMarquardt.Minimise(new Rosenbrock(), [-1.2, 1.0], [1, 1], null, 2);
        Assert.Equal(LmExit.IterationLimit, outcome.Exit);
        Assert.False(outcome.Converged);
    }
}
