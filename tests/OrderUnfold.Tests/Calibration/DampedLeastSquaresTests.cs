using OrderUnfold.Calibration;
using Xunit;

namespace OrderUnfold.Tests.Calibration;

/// <summary>The calibration fits' Levenberg–Marquardt minimiser: its minimum, its crawl stop and its shared budget.</summary>
public class DampedLeastSquaresTests
{
    /// <summary>Rosenbrock's function as a least-squares problem, r = (10(x₂ − x₁²), 1 − x₁), from (−1.2, 1): minimum at
    /// (1, 1) with Σr² = 0 (Moré, Garbow & Hillstrom, ACM TOMS 7 (1981) 17–41, problem 1).</summary>
    private static void Rosenbrock(double[] p, double[] r, double[,]? j)
    {
        r[0] = 10 * (p[1] - p[0] * p[0]);
        r[1] = 1 - p[0];
        if (j is null) return;
        // the minimiser takes the Jacobian of the model, i.e. of −r
        j[0, 0] = 20 * p[0];
        j[0, 1] = -10;
        j[1, 0] = 1;
        j[1, 1] = 0;
    }

    [Fact]
    public void FindsTheRosenbrockMinimum()
    {
        var fit = DampedLeastSquares.Minimize(Rosenbrock, [-1.2, 1], 2, maxIterations: 200, tolerance: 1e-14);
        Assert.Equal(1, fit.Parameters[0], 1e-5);
        Assert.Equal(1, fit.Parameters[1], 1e-5);
    }

    [Fact]
    public void ABudgetThatSaysStopEndsTheFitWhereItIs()
    {
        var asked = 0;
        var fit = DampedLeastSquares.Minimize(Rosenbrock, [-1.2, 1], 2, maxIterations: 200, keepGoing: () => ++asked <= 3);
        Assert.Equal(4, asked);
        Assert.False(fit.Converged);
        Assert.True(fit.Iterations <= 4);
    }

    [Fact]
    public void CrawlingStepsEndTheFitEarly()
    {
        // a crawl threshold far above the whole χ² (24.2 at the start) makes every step a crawl: five accepted steps end it
        var full = DampedLeastSquares.Minimize(Rosenbrock, [-1.2, 1], 2, maxIterations: 200, tolerance: 1e-14);
        var crawl = DampedLeastSquares.Minimize(Rosenbrock, [-1.2, 1], 2, maxIterations: 200, tolerance: 1e-14, crawlChiSquare: 1e3);
        Assert.True(crawl.Converged);
        Assert.True(crawl.Iterations <= 5, $"{crawl.Iterations} iterations");
        Assert.True(full.Iterations > crawl.Iterations);
    }
}
