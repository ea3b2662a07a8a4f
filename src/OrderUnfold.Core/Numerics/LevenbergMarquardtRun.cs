namespace OrderUnfold.Numerics;

/// <summary>
/// The state of one <see cref="LevenbergMarquardt"/> minimisation. The free parameters are ordered block by block, the
/// border last, so that the damped matrix is block-arrowhead and its Cholesky factor stays within each row's envelope
/// (<c>_first[u]</c>: the first column that can be non-zero in row u). The work is done in scaled parameters q = p / s:
/// A = S·JᵀWJ·S, g = S·JᵀW r.
/// </summary>
internal sealed class LevenbergMarquardtRun
{
    private readonly ILeastSquaresProblem _problem;
    private readonly LmSettings _settings;
    private readonly double[] _scales;
    private readonly int[] _free;
    private readonly int[] _first;
    private readonly int _n;
    private readonly int _f;
    private readonly double[] _p;
    private double[] _jtj;
    private double[] _jtr;
    private double[] _nextJtj;
    private double[] _nextJtr;
    private double _chi;
    private readonly double[] _a;
    private readonly double[] _g;
    private readonly double[] _d;
    private readonly double[] _h;
    private readonly double[] _chol;
    private readonly double[] _trial;
    private double _mu = 1e-3;
    private double _nu = 2.0;
    private int _crawl;

    public LevenbergMarquardtRun(ILeastSquaresProblem problem, double[] p0, LmSettings settings)
    {
        _problem = problem;
        _settings = settings;
        _n = problem.Count;
        _scales = settings.Scales ?? Enumerable.Repeat(1.0, _n).ToArray();
        var blocks = problem.Blocks;
        var isFixed = settings.IsFixed;
        _free = Enumerable.Range(0, _n).Where(i => isFixed is null || !isFixed[i])
            .OrderBy(i => blocks is null ? 0 : blocks[i] < 0 ? int.MaxValue : blocks[i]).ThenBy(i => i).ToArray();
        _f = _free.Length;
        _first = new int[_f];
        for (var u = 1; u < _f; u++)
        {
            var bu = blocks is null ? -1 : blocks[_free[u]];
            _first[u] = bu >= 0 && blocks![_free[u - 1]] == bu ? _first[u - 1] : bu >= 0 ? u : 0;
        }

        _p = (double[])p0.Clone();
        ClampIntoBox(_p);
        _jtj = new double[_n * _n];
        _jtr = new double[_n];
        _nextJtj = new double[_n * _n];
        _nextJtr = new double[_n];
        _a = new double[_f * _f];
        _g = new double[_f];
        _d = new double[_f];
        _h = new double[_f];
        _chol = new double[_f * _f];
        _trial = new double[_n];
    }

    public LmOutcome Minimise()
    {
        _chi = _problem.Normal(_p, _jtj, _jtr);
        if (!Finite(_chi, _jtj, _jtr)) return Outcome(LmExit.NonFinite, 0);
        if (_f == 0) return Outcome(LmExit.SmallStep, 0);
        Scaled();
        var dMax = _d.Max();
        if (!(dMax > 0)) return Outcome(LmExit.SmallStep, 0);
        for (var u = 0; u < _f; u++) _d[u] = Math.Max(_d[u], 1e-12 * dMax);
        for (var iteration = 1; iteration <= _settings.MaxIterations; iteration++)
        {
            _settings.CancellationToken.ThrowIfCancellationRequested(); // the caller's stop (a shared budget's token: budget.Spend)
            if (_settings.KeepGoing is { } keepGoing && !keepGoing()) return Outcome(LmExit.Budget, iteration - 1);
            if (_settings.Budget is { } budget && !budget.Spend()) return Outcome(LmExit.Budget, iteration - 1);
            var exit = Iterate();
            if (exit is not null) return Outcome(exit.Value, iteration);
        }

        return Outcome(LmExit.IterationLimit, _settings.MaxIterations);
    }

    /// <summary>One damped solve and, unless a criterion stops the fit first, one trial step; null: go on.</summary>
    private LmExit? Iterate()
    {
        // solve (A + μD) h = g by Cholesky; a failed factorisation (A not positive definite) raises the damping
        if (!SolveDamped(null)) return RaiseDamping();
        if (HeldAtBounds() is { } held && !SolveDamped(held)) return RaiseDamping();
        var clamped = TrialPoint();
        var predicted = clamped ? ModelDecrease() : DampedDecrease();
        double stepMax = 0, sizeMax = 0;
        for (var u = 0; u < _f; u++)
        {
            stepMax = Math.Max(stepMax, Math.Abs(_h[u]));
            sizeMax = Math.Max(sizeMax, Math.Abs(_p[_free[u]] / _scales[_free[u]]));
        }

        var smallStep = stepMax <= _settings.StepTolerance * (1 + sizeMax);
        if (smallStep || (predicted < _settings.ChiSquareTolerance && _mu < 1)) return smallStep ? LmExit.SmallStep : LmExit.SmallDecrease;

        // the normal equations at the trial point are needed when it is accepted, which is the usual case near a minimum
        var chiNext = _problem.Normal(_trial, _nextJtj, _nextJtr);
        var rho = Finite(chiNext, _nextJtj, _nextJtr) && predicted > 0 ? (_chi - chiNext) / predicted : -1;
        return rho > 0 ? Accept(chiNext, rho, predicted) : RaiseDamping();
    }

    /// <summary>Solves (A + μD) h = g; parameters marked in <paramref name="held"/> are kept out (their h is 0).</summary>
    private bool SolveDamped(bool[]? held)
    {
        for (var i = 0; i < _f * _f; i++) _chol[i] = _a[i];
        for (var u = 0; u < _f; u++) _chol[u * _f + u] += _mu * _d[u];
        var rhs = _g;
        if (held is not null)
        {
            rhs = (double[])_g.Clone();
            for (var u = 0; u < _f; u++)
            {
                if (!held[u]) continue;
                rhs[u] = 0;
                for (var v = 0; v < _f; v++)
                    if (v != u) _chol[u * _f + v] = _chol[v * _f + u] = 0;
            }
        }

        if (!LevenbergMarquardt.Cholesky(_chol, _f, _first)) return false;
        LevenbergMarquardt.Solve(_chol, _f, rhs, _h, _first);
        return true;
    }

    /// <summary>The parameters that sit on a bound and that the step would push beyond it (null: none): they are held
    /// there for this step, so that the others move as the reduced problem wants rather than as a clamped full step.</summary>
    private bool[]? HeldAtBounds()
    {
        if (_settings.Lower is null && _settings.Upper is null) return null;
        bool[]? held = null;
        for (var u = 0; u < _f; u++)
        {
            var i = _free[u];
            var atLower = _settings.Lower is { } lower && _p[i] <= lower[i] && _h[u] < 0;
            var atUpper = _settings.Upper is { } upper && _p[i] >= upper[i] && _h[u] > 0;
            if (!atLower && !atUpper) continue;
            held ??= new bool[_f];
            held[u] = true;
        }

        return held;
    }

    /// <summary>Takes the trial point; the stopping criteria that look at an accepted step decide whether to go on.</summary>
    private LmExit? Accept(double chiNext, double rho, double predicted)
    {
        var decrease = _chi - chiNext;
        var chiBefore = _chi;
        var relativeStepSmall = RelativeStepIsSmall();
        Array.Copy(_trial, _p, _n);
        (_jtj, _nextJtj) = (_nextJtj, _jtj);
        (_jtr, _nextJtr) = (_nextJtr, _jtr);
        _chi = chiNext;
        Scaled();
        var t = 2 * rho - 1;
        _mu *= Math.Max(1.0 / 3, 1 - t * t * t);
        _nu = 2;
        var tolerance = _settings.ChiSquareTolerance;
        if (decrease < tolerance && predicted < 2 * tolerance) return LmExit.SmallDecrease;
        // a crawl: accepted steps that each lower χ² by less than the threshold while the model predicts more (a
        // mismatched model near its best) end the fit after a few in a row instead of running to the limit
        _crawl = decrease < (_settings.CrawlChiSquare ?? tolerance) ? _crawl + 1 : 0;
        if (_crawl >= LevenbergMarquardt.CrawlSteps) return LmExit.SmallDecrease;
        if (decrease < _settings.RelativeChiSquareTolerance * Math.Max(chiBefore, 1e-300)) return LmExit.SmallDecrease;
        return relativeStepSmall ? LmExit.SmallStep : null;
    }

    private LmExit? RaiseDamping()
    {
        _mu *= _nu;
        _nu *= 2;
        return _mu > 1e20 ? LmExit.NoFurtherDecrease : null;
    }

    /// <summary>Fills the trial point p + S·h. A step that would leave the box is shortened along its direction to the
    /// first bound it meets (that parameter is then held there by <see cref="HeldAtBounds"/> while the step pushes outward);
    /// true when the step was shortened.</summary>
    private bool TrialPoint()
    {
        Array.Copy(_p, _trial, _n);
        var fraction = _settings.Lower is null && _settings.Upper is null ? 1.0 : StepFractionInsideBox();
        if (fraction < 1)
            for (var u = 0; u < _f; u++) _h[u] *= fraction;
        for (var u = 0; u < _f; u++) _trial[_free[u]] += _scales[_free[u]] * _h[u];
        if (fraction < 1) ClampIntoBox(_trial); // the parameter that met its bound lands on it exactly
        return fraction < 1;
    }

    /// <summary>The largest fraction (≤ 1) of the step S·h that keeps every free parameter inside its bounds.</summary>
    private double StepFractionInsideBox()
    {
        var fraction = 1.0;
        for (var u = 0; u < _f; u++)
        {
            var i = _free[u];
            var step = _scales[i] * _h[u];
            if (step < 0 && _settings.Lower is { } lower && _p[i] + step < lower[i]) fraction = Math.Min(fraction, (lower[i] - _p[i]) / step);
            if (step > 0 && _settings.Upper is { } upper && _p[i] + step > upper[i]) fraction = Math.Min(fraction, (upper[i] - _p[i]) / step);
        }

        return Math.Max(0, fraction);
    }

    /// <summary>Decrease of χ² that the Gauss–Newton model predicts for the damped step: h·(μDh + g).</summary>
    private double DampedDecrease()
    {
        var predicted = 0.0;
        for (var u = 0; u < _f; u++) predicted += _h[u] * (_mu * _d[u] * _h[u] + _g[u]);
        return predicted;
    }

    /// <summary>Decrease of χ² that the Gauss–Newton model predicts for any step h (here a shortened one): 2gᵀh − hᵀAh.</summary>
    private double ModelDecrease()
    {
        var predicted = 0.0;
        for (var u = 0; u < _f; u++)
        {
            var ah = 0.0;
            for (var v = 0; v < _f; v++) ah += _a[u * _f + v] * _h[v];
            predicted += 2 * _g[u] * _h[u] - _h[u] * ah;
        }

        return predicted;
    }

    private bool RelativeStepIsSmall()
    {
        var tolerance = _settings.RelativeStepTolerance;
        if (!(tolerance > 0)) return false;
        foreach (var i in _free)
            if (Math.Abs(_trial[i] - _p[i]) > tolerance * (Math.Abs(_p[i]) + 1e-12)) return false;
        return true;
    }

    private void Scaled()
    {
        for (var u = 0; u < _f; u++)
        {
            var su = _scales[_free[u]];
            _g[u] = su * _jtr[_free[u]];
            for (var v = 0; v < _f; v++) _a[u * _f + v] = su * _scales[_free[v]] * _jtj[_free[u] * _n + _free[v]];
            _d[u] = Math.Max(_d[u], _a[u * _f + u]); // Moré (1978): the scaling only grows, which keeps steps bounded
        }
    }

    private void ClampIntoBox(double[] p)
    {
        for (var i = 0; i < p.Length; i++)
        {
            if (_settings.Lower is { } lower && p[i] < lower[i]) p[i] = lower[i];
            if (_settings.Upper is { } upper && p[i] > upper[i]) p[i] = upper[i];
        }
    }

    private static bool Finite(double chi, double[] jtj, double[] jtr) => double.IsFinite(chi) && jtj.All(double.IsFinite) && jtr.All(double.IsFinite);

    private LmOutcome Outcome(LmExit exit, int iterations) => new(_p, _chi, _jtj, exit, iterations);
}
