using MathNet.Numerics;
using OrderUnfold.Calibration;
using Xunit;

namespace OrderUnfold.Tests.Calibration;

/// <summary>Axis polynomial fits against MathNet.Numerics' <c>Fit.Polynomial</c> (a general-purpose reference library).
/// The two parameterise differently (t = (x − c)/h against raw x), so fitted values are compared, not coefficients.
/// Points are simulated.</summary>
public class AxisPolynomialTests
{
    private static (double[] X, double[] F) Points(int seed, int count, double x0, double x1, double noiseHz)
    {
        var rng = new Random(seed);
        var x = Enumerable.Range(0, count).Select(i => x0 + (x1 - x0) * (i + 0.3 * rng.NextDouble()) / count).ToArray();
        var f = x.Select(v =>
        {
            var u = (v - x0) / (x1 - x0);
            return 7.5e9 * (u + 0.05 * (u * u - u) + 0.02 * (u * u * u - u)) + noiseHz * OrderUnfold.Simulation.Simulator.Gaussian(rng);
        }).ToArray();
        return (x, f);
    }

    [Theory]
    [InlineData(1, 0.0, 10.0)]   // ramp volts
    [InlineData(2, 0.0, 10.0)]
    [InlineData(3, -5.0, 5.0)]
    [InlineData(4, 2.0, 9.0)]
    [InlineData(5, 0.0, 10.0)]
    public void FittedValuesMatchMathNetPolynomialFit(int degree, double x0, double x1)
    {
        var (x, f) = Points(degree, 12, x0, x1, 2e5);
        var ours = AxisPolynomial.Fit(x, f, degree);
        var reference = Fit.Polynomial(x, f, degree); // coefficients in raw x, lowest order first
        Assert.Equal(degree, ours.Degree);
        var scale = f.Max(Math.Abs);
        foreach (var v in x.Concat([x0, 0.5 * (x0 + x1), x1]))
        {
            var expected = Polynomial.Evaluate(v, reference);
            Assert.True(Math.Abs(ours.Evaluate(v) - expected) <= 1e-9 * scale, $"degree {degree}, x = {v}: {ours.Evaluate(v)} vs {expected}");
        }
    }

    [Fact]
    public void WeightedFitMatchesMathNetWeightedFit()
    {
        var (x, f) = Points(9, 15, 0, 10, 5e5);
        var rng = new Random(10);
        var w = x.Select(_ => 0.2 + rng.NextDouble()).ToArray();
        var ours = AxisPolynomial.Fit(x, f, 3, w);
        var reference = Fit.PolynomialWeighted(x, f, w, 3); // minimises Σ wᵢ rᵢ², as AxisPolynomial does
        foreach (var v in x) Assert.Equal(Polynomial.Evaluate(v, reference), ours.Evaluate(v), 1e-9 * 7.5e9);
    }

    [Fact]
    public void TimeAxisInMicrosecondsIsStillWellConditioned()
    {
        // x in seconds over 6 ms (a time scan): the normalisation t = (x − c)/h keeps the fit exact for an exact polynomial
        var x = Enumerable.Range(0, 9).Select(i => 1e-4 + i * 7e-4).ToArray();
        double Truth(double v) => 1e3 + 2.5e12 * v - 4e13 * v * v + 1.5e15 * v * v * v;
        var fit = AxisPolynomial.Fit(x, x.Select(Truth).ToArray(), 3);
        foreach (var v in x) Assert.Equal(Truth(v), fit.Evaluate(v), 1e-9 * 1.5e10);
        // derivative of the exact cubic
        foreach (var v in x) Assert.Equal(2.5e12 - 8e13 * v + 4.5e15 * v * v, fit.Derivative(v), 1e-7 * 2.5e12);
        Assert.Equal(x.Min(), fit.XMin);
        Assert.Equal(x.Max(), fit.XMax);
    }

    [Fact]
    public void EvaluateAndDerivativeOfAGivenPolynomial()
    {
        // f(t) = 1 + 2t + 3t², t = (x − 4)/2  →  f(6) = 1 + 2 + 3 = 6, f′(6) = (2 + 6·1)/2 = 4
        var p = new AxisPolynomial([1.0, 2.0, 3.0], 4, 2, 0, 8);
        Assert.Equal(6.0, p.Evaluate(6.0));
        Assert.Equal(4.0, p.Derivative(6.0));
        Assert.Equal(1.0, p.Evaluate(4.0));
        Assert.Equal([1.0, 6.0], p.Evaluate([4.0, 6.0]));
        var scaled = p.Scaled(2, 10);
        Assert.Equal(2 * 6.0 + 10, scaled.Evaluate(6.0));
        Assert.Equal(8.0, scaled.Derivative(6.0));
    }

    [Fact]
    public void IsMonotone()
    {
        // f(t) = t²: decreasing then increasing on [−1, 1], monotone on [0.1, 1] and on [−1, −0.1]
        var square = new AxisPolynomial([0.0, 0.0, 1.0], 0, 1, -1, 1);
        Assert.False(square.IsMonotone(-1, 1));
        Assert.True(square.IsMonotone(0.1, 1));
        Assert.True(square.IsMonotone(-1, -0.1));
        // f(t) = t + 0.3 t³ is increasing everywhere; f(t) = −t decreasing everywhere
        Assert.True(new AxisPolynomial([0.0, 1.0, 0.0, 0.3], 0, 1, -1, 1).IsMonotone(-5, 5));
        Assert.True(new AxisPolynomial([0.0, -1.0], 0, 1, -1, 1).IsMonotone(-5, 5));
        // a flat polynomial is not strictly monotone
        Assert.False(new AxisPolynomial([3.0], 0, 1, -1, 1).IsMonotone(-1, 1));
        // t − t³/3·4: f′ = 1 − 4t² changes sign at ±0.5
        var wiggle = new AxisPolynomial([0.0, 1.0, 0.0, -4.0 / 3], 0, 1, -1, 1);
        Assert.True(wiggle.IsMonotone(-0.45, 0.45));
        Assert.False(wiggle.IsMonotone(-0.6, 0.6));
    }

    [Fact]
    public void BadArgumentsAreRejected()
    {
        Assert.Throws<ArgumentException>(() => AxisPolynomial.Fit([1.0, 2.0], [1.0, 2.0, 3.0], 1));
        var e = Assert.Throws<ArgumentException>(() => AxisPolynomial.Fit([1.0, 2.0], [1.0, 2.0], 2));
        Assert.Contains("at least 3 points", e.Message);
        Assert.Throws<ArgumentOutOfRangeException>(() => AxisPolynomial.Fit([1.0, 2.0], [1.0, 2.0], -1));
        Assert.Throws<ArgumentException>(() => new AxisPolynomial([], 0, 1, 0, 1));
        Assert.Throws<ArgumentException>(() => new AxisPolynomial([1.0], 0, 0, 0, 1));
    }
}
