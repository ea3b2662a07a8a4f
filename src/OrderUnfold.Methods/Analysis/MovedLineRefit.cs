using MathNet.Numerics.LinearAlgebra;

namespace OrderUnfold.Analysis;

/// <summary>
/// The order check's quick refit: line j moved to a new position, then its position, intensity and the sweeps'
/// backgrounds refitted by a few damped Gauss–Newton steps while the other lines stay as fitted (their model is
/// <c>fixedModel</c>, the solution without line j).
/// </summary>
internal sealed class MovedLineRefit
{
    /// <summary>Gauss–Newton steps of one quick refit (from a shift by whole FSRs the line starts within a fraction of a
    /// linewidth of its best position). Chosen bound.</summary>
    private const int MaxSteps = 10;

    /// <summary>Each diagonal element of the small normal matrix is multiplied by this (a Levenberg-style damping of 10⁻⁴
    /// that keeps the solve regular when the moved line falls where no sample sees it). Chosen.</summary>
    private const double DiagonalDamping = 1.0001;

    /// <summary>A step is halved until χ² does not rise, down to this fraction of the full step (ten halvings).</summary>
    private const double SmallestStepFraction = 1e-3;

    /// <summary>The refit stops when an accepted step lowers χ² by less than this fraction of it.</summary>
    private const double RelativeImprovement = 1e-9;

    private readonly SweepSamples _samples;
    private readonly ParameterLayout _layout;
    private readonly double[] _parameters;
    private readonly int _line;
    private readonly double[] _fixedModel;
    private readonly LineShape[] _shapes;

    /// <summary>A quick refit of line <paramref name="line"/> of <paramref name="parameters"/> against <paramref name="fixedModel"/>.</summary>
    public MovedLineRefit(SweepSamples samples, ParameterLayout layout, double[] parameters, int line, double[] fixedModel)
    {
        _samples = samples;
        _layout = layout;
        _parameters = parameters;
        _line = line;
        _fixedModel = fixedModel;
        var width = layout.FitsWidths ? Math.Abs(parameters[layout.Width(line)]) : 0;
        _shapes = samples.Sweeps.Select(s => LineShape.For(s.Instrument, width)).ToArray(); // the moved line's profile per sweep
    }

    private int SweepCount => _samples.Sweeps.Count;

    private double Offset(int k) => k == 0 ? 0 : _parameters[_layout.Offset(k)];

    private double Gain(int k) => k == 0 ? 1 : _parameters[_layout.Gain(k)];

    /// <summary>χ² after moving the line to <paramref name="movedNu"/> and refitting; also the moved line's final position
    /// and intensity. Each step spends one unit of <paramref name="budget"/>.</summary>
    public (double Chi, double Nu, double A) Run(double movedNu, WorkBudget budget)
    {
        var nu = movedNu;
        var a = _parameters[_layout.Intensity(_line)];
        var bg = new double[SweepCount];
        var lw = _samples.Sweeps.Min(s => s.Instrument.LinewidthHz);
        var chi = ChiSquare(nu, a, bg);
        for (var it = 0; it < MaxSteps; it++)
        {
            if (!budget.Spend()) break;
            var step = GaussNewtonStep(nu, a, bg);
            if (step is null || !step.All(double.IsFinite)) break;
            // damped step: halve until χ² does not rise
            var accepted = false;
            for (var h = 1.0; h > SmallestStepFraction; h /= 2)
            {
                var nuT = nu + Math.Clamp(h * step[0], -lw, lw);
                var aT = Math.Max(0, a + h * step[1]);
                var bgT = bg.Select((b, s) => b + h * step[2 + s]).ToArray();
                var c = ChiSquare(nuT, aT, bgT);
                if (c <= chi)
                {
                    accepted = chi - c > RelativeImprovement * chi;
                    (nu, a, bg, chi) = (nuT, aT, bgT, c);
                    break;
                }
            }

            if (!accepted) break;
        }

        return (chi, nu, a);
    }

    /// <summary>χ² with the moved line at <paramref name="nu"/> of intensity <paramref name="a"/> and background changes
    /// <paramref name="bg"/> (offsets to the fixed model's backgrounds).</summary>
    private double ChiSquare(double nu, double a, double[] bg)
    {
        var (y, f, w) = (_samples.Signal, _samples.ScanHz, _samples.Weight);
        double c = 0;
        for (var s = 0; s < SweepCount; s++)
        {
            var phi = Offset(s);
            var g = Gain(s);
            for (var i = _samples.SweepStart[s]; i < _samples.SweepStart[s + 1]; i++)
            {
                var r = y[i] - (_fixedModel[i] + g * a * _shapes[s].Evaluate(nu - phi - f[i]).T + bg[s]);
                c += r * r * w[i];
            }
        }

        return c;
    }

    /// <summary>The damped Gauss–Newton step in (ν, a, b_k); null when the normal matrix cannot be solved.</summary>
    private Vector<double>? GaussNewtonStep(double nu, double a, double[] bg)
    {
        var (y, f, w) = (_samples.Signal, _samples.ScanHz, _samples.Weight);
        var n = 2 + SweepCount;
        var jtj = Matrix<double>.Build.Dense(n, n);
        var jtr = Vector<double>.Build.Dense(n);
        var row = new double[n];
        for (var s = 0; s < SweepCount; s++)
        {
            var phi = Offset(s);
            var g = Gain(s);
            for (var i = _samples.SweepStart[s]; i < _samples.SweepStart[s + 1]; i++)
            {
                var (t, dt) = _shapes[s].Evaluate(nu - phi - f[i]);
                var r = y[i] - (_fixedModel[i] + g * a * t + bg[s]);
                var wgt = w[i];
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

        for (var u = 0; u < n; u++) jtj[u, u] *= DiagonalDamping;
        try
        {
            return jtj.Solve(jtr);
        }
        catch (ArithmeticException)
        {
            return null;
        }
    }
}
