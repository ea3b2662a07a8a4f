using Xunit;

namespace OrderUnfold.Tests.Numerics;

/// <summary>The one Levenberg–Marquardt solver in its residual form (the calibration fits' way of calling it): a certified
/// reference problem, bounds, the crawl stop and the keep-going test.</summary>
public class LevenbergMarquardtReferenceTests
{
    // NIST Statistical Reference Datasets (StRD), nonlinear regression, "Misra1a" (lower difficulty):
    // y = b1·(1 − exp(−b2·x)), 14 observations, https://www.itl.nist.gov/div898/strd/nls/data/misra1a.shtml
    private static readonly double[] MisraY = [10.07, 14.73, 17.94, 23.93, 29.61, 35.18, 40.02, 44.82, 50.76, 55.05, 61.01, 66.40, 75.47, 81.78];
    private static readonly double[] MisraX = [77.6, 114.9, 141.1, 190.8, 239.9, 289.0, 332.8, 378.4, 434.8, 477.3, 536.8, 593.1, 689.1, 760.0];

    // the certified values of that page (parameters, their standard deviations, residual sum of squares)
    private const double CertifiedB1 = 2.3894212918E+02;
    private const double CertifiedB2 = 5.5015643181E-04;
    private const double CertifiedSdB1 = 2.7070075241E+00;
    private const double CertifiedSdB2 = 7.2668688436E-06;
    private const double CertifiedResidualSumOfSquares = 1.2455138894E-01;

    private static void Misra1a(double[] b, double[] r, double[,]? j)
    {
        for (var i = 0; i < MisraX.Length; i++)
        {
            var e = Math.Exp(-b[1] * MisraX[i]);
            r[i] = MisraY[i] - b[0] * (1 - e);
            if (j is null) continue;
            j[i, 0] = 1 - e;
            j[i, 1] = b[0] * MisraX[i] * e;
        }
    }

    [Theory]
    [InlineData(500, 1e-4)] // NIST start 1
    [InlineData(250, 5e-4)] // NIST start 2
    public void MatchesTheCertifiedValuesOfNistMisra1a(double b1, double b2)
    {
        var fit = LevenbergMarquardt.MinimiseResiduals(Misra1a, [b1, b2], MisraX.Length,
            new LmSettings { MaxIterations = 500, ChiSquareTolerance = 1e-20, StepTolerance = 1e-14 });
        Assert.True(fit.Converged, fit.Exit.ToString());
        // NIST: a solver is expected to reproduce about 6 significant digits from these starts
        Assert.Equal(1, fit.P[0] / CertifiedB1, 1e-7);
        Assert.Equal(1, fit.P[1] / CertifiedB2, 1e-7);
        Assert.Equal(1, fit.ChiSquare / CertifiedResidualSumOfSquares, 1e-7);
        var covariance = fit.Covariance();
        Assert.NotNull(covariance);
        var variance = fit.ChiSquare / (MisraX.Length - 2);
        Assert.Equal(1, Math.Sqrt(covariance[0, 0] * variance) / CertifiedSdB1, 1e-5);
        Assert.Equal(1, Math.Sqrt(covariance[1, 1] * variance) / CertifiedSdB2, 1e-5);
    }

    [Fact]
    public void TheCalibrationSettingsAlsoReachTheCertifiedMinimum()
    {
        // the relative stopping rules of the calibration fits (no scaled step test) from the far start
        var fit = LevenbergMarquardt.MinimiseResiduals(Misra1a, [500, 1e-4], MisraX.Length, LmSettings.Relative(200, 1e-12));
        Assert.True(fit.Converged, fit.Exit.ToString());
        Assert.Equal(1, fit.P[0] / CertifiedB1, 1e-5);
        Assert.Equal(1, fit.P[1] / CertifiedB2, 1e-5);
    }

    /// <summary>Rosenbrock's function as residuals r = (10(x₂ − x₁²), 1 − x₁) (Moré, Garbow &amp; Hillstrom, ACM TOMS 7 (1981)
    /// 17–41, problem 1; recalled from memory): minimum (1, 1), χ² 0 at the start (−1.2, 1) is 24.2.</summary>
    private static void Rosenbrock(double[] p, double[] r, double[,]? j)
    {
        r[0] = 10 * (p[1] - p[0] * p[0]);
        r[1] = 1 - p[0];
        if (j is null) return;
        // the solver takes the Jacobian of the model, i.e. of −r
        j[0, 0] = 20 * p[0];
        j[0, 1] = -10;
        j[1, 0] = 1;
        j[1, 1] = 0;
    }

    [Fact]
    public void BoundsHoldAndTheBoundedMinimumIsFound()
    {
        // with x₁ ≤ 0.5 the minimum lies on the bound: x₂ = x₁² = 0.25 and χ² = (1 − 0.5)² = 0.25 (worked out by hand)
        var fit = LevenbergMarquardt.MinimiseResiduals(Rosenbrock, [-1.2, 1], 2,
            LmSettings.Relative(200, 1e-14) with { Upper = [0.5, double.PositiveInfinity] });
        Assert.True(fit.Converged, fit.Exit.ToString());
        Assert.True(Math.Abs(fit.P[0] - 0.5) < 1e-6, $"{fit.Exit} {fit.Iterations} {fit.P[0]} {fit.P[1]} {fit.ChiSquare}");
        Assert.Equal(0.25, fit.P[1], 1e-5);
        Assert.Equal(0.25, fit.ChiSquare, 1e-8);
    }

    [Fact]
    public void AKeepGoingTestThatSaysStopEndsTheFitWhereItIs()
    {
        var asked = 0;
        var fit = LevenbergMarquardt.MinimiseResiduals(Rosenbrock, [-1.2, 1], 2, LmSettings.Relative(200, 1e-9) with { KeepGoing = () => ++asked <= 3 });
        Assert.Equal(4, asked);
        Assert.False(fit.Converged);
        Assert.Equal(LmExit.Budget, fit.Exit);
        Assert.Equal(3, fit.Iterations);
    }

    [Fact]
    public void ASharedBudgetEndsTheFit()
    {
        var budget = new WorkBudget(3, double.PositiveInfinity);
        var fit = LevenbergMarquardt.MinimiseResiduals(Rosenbrock, [-1.2, 1], 2, LmSettings.Relative(200, 1e-9) with { Budget = budget });
        Assert.Equal(LmExit.Budget, fit.Exit);
        Assert.NotNull(budget.Exhausted);
    }

    [Fact]
    public void CrawlingStepsEndTheFitEarly()
    {
        // a crawl threshold far above the whole χ² (24.2 at the start) makes every accepted step a crawl: five end it
        // (a zero-residual problem: the absolute χ² tolerance meant for whitened data is lowered to reach the exact minimum)
        var full = LevenbergMarquardt.MinimiseResiduals(Rosenbrock, [-1.2, 1], 2, LmSettings.Relative(200, 1e-14) with { ChiSquareTolerance = 1e-24 });
        var crawl = LevenbergMarquardt.MinimiseResiduals(Rosenbrock, [-1.2, 1], 2, LmSettings.Relative(200, 1e-14) with { CrawlChiSquare = 1e3 });
        Assert.True(crawl.Converged, crawl.Exit.ToString());
        Assert.True(full.Iterations > crawl.Iterations, $"{full.Iterations} vs {crawl.Iterations}");
        Assert.Equal(1, full.P[0], 1e-5);
        Assert.Equal(1, full.P[1], 1e-5);
    }
}
