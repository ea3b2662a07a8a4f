using MathNet.Numerics.LinearAlgebra;

namespace OrderUnfold.Calibration;

/// <summary>An axis fitted to repeat constraints, with its χ², shape uncertainty, leverages and leave-one-out error.</summary>
internal sealed record RepeatAxisFit(AxisPolynomial Axis, double ChiSquare, double AxisSigmaHz, double[] Leverage, double Press)
{
    /// <summary>Covariance of c₁…c_d (row-major, Hz²), scaled by χ² per degree of freedom; null when not computable.</summary>
    public double[]? ShapeCovariance { get; init; }
}

/// <summary>The axis polynomial from repeat constraints: weighted least squares, degree by leave-one-out, outlier rejection.</summary>
internal static class RepeatAxisFitting
{
    internal static (RepeatAxisFit Fit, List<DegreeScore> Scores) FitWithRejection(List<RepeatConstraint> all, Sweep sweep, SelfCalibrationOptions options, double xLo, double xHi)
    {
        foreach (var c in all) c.Used = true;
        RepeatAxisFit? fit = null;
        List<DegreeScore> scores = [];
        for (var pass = 0; pass < 6; pass++)
        {
            var used = all.Where(c => c.Used).ToList();
            (fit, scores) = ChooseDegree(used, sweep, options, xLo, xHi);
            foreach (var c in all) c.Residual = c.Delta - (fit.Axis.Evaluate(c.RepeatX) - fit.Axis.Evaluate(c.FirstX));
            // deleted (leave-one-out) residuals: r / (1 − h) for the constraints in the fit, r for those left out
            var lev = new Dictionary<RepeatConstraint, double>(ReferenceEqualityComparer.Instance);
            for (var k = 0; k < used.Count && k < fit.Leverage.Length; k++) lev[used[k]] = fit.Leverage[k];
            double Deleted(RepeatConstraint c) => Math.Abs(c.Residual) / c.Sigma / (1 - lev.GetValueOrDefault(c, 0));
            var scale = 1.4826 * Medians.Upper(used.Select(Deleted));
            if (!(scale > 0)) break;
            var limit = options.RejectSigma * scale;
            var changed = false;
            foreach (var c in all)
            {
                var keep = Deleted(c) <= limit;
                if (keep != c.Used)
                {
                    c.Used = keep;
                    changed = true;
                }
            }

            if (all.Count(c => c.Used) < 2)
            {
                foreach (var c in all) c.Used = true;
                break;
            }

            if (!changed) break;
        }

        return (fit!, scores);
    }

    internal static (RepeatAxisFit Fit, List<DegreeScore> Scores) ChooseDegree(List<RepeatConstraint> used, Sweep sweep, SelfCalibrationOptions options, double xLo, double xHi)
    {
        var n = used.Count;
        var period = used.Max(c => Math.Abs(c.Delta));
        var scores = new List<DegreeScore>();
        if (options.Degree is int d)
        {
            if (d < 1) throw new InputException($"axis degree must be at least 1 but got {d}");
            if (n < d + 1)
                throw new InputException($"{sweep.Name}: {n} calibration constraints (repeat pairs and calibration peaks) are too few for a degree-{d} axis (needs at least {d + 1}); lower the degree or sweep over more FSRs", sweep.Source);
            var f = Solve(used, d, sweep.X[0], xLo, xHi)
                    ?? throw new InputException($"{sweep.Name}: the repeat pairs cannot determine a degree-{d} axis (they cover too little of the sweep)", sweep.Source);
            var mono = f.Axis.IsMonotone(f.Axis.XMin, f.Axis.XMax, 801);
            scores.Add(new DegreeScore(d, f.ChiSquare, Bic(f.ChiSquare, n, d, period), f.Press, mono));
            if (!mono)
                throw new InputException($"{sweep.Name}: the fitted degree-{d} axis is not monotone over the sweep; lower the degree", sweep.Source);
            return (f, scores);
        }

        // degree by leave-one-out cross-validation over the constraints (PRESS); of degrees that predict about
        // as well (within 5 %), the lowest: a high degree on few pairs bends at the ends, which PRESS sees
        var fits = new List<RepeatAxisFit>();
        var maxDegree = Math.Max(1, Math.Min(options.MaxDegree, n - 2));
        for (var deg = 1; deg <= maxDegree; deg++)
        {
            var f = Solve(used, deg, sweep.X[0], xLo, xHi);
            if (f is null) break;
            var mono = f.Axis.IsMonotone(f.Axis.XMin, f.Axis.XMax, 801);
            scores.Add(new DegreeScore(deg, f.ChiSquare, Bic(f.ChiSquare, n, deg, period), f.Press, mono));
            if (mono && double.IsFinite(f.Press)) fits.Add(f);
        }

        RepeatAxisFit? best = null;
        if (fits.Count > 0)
        {
            var minPress = fits.Min(f => f.Press);
            best = fits.First(f => f.Press <= 1.05 * minPress + 1e-12);
        }

        if (best is null)
            throw new InputException($"{sweep.Name}: no monotone axis polynomial fits the {n} repeat pairs; the sweep may not be a single ramp or the repeats were mismatched. Add a [[calibration]] sweep for this instrument", sweep.Source);
        return (best, scores);
    }

    internal static double Bic(double chi, int n, int degree, double period)
    {
        // χ² is whitened (dimensionless); the floor keeps a noiseless fit from scoring −∞
        var floor = n * 1e-8;
        return n * Math.Log(Math.Max(chi, floor) / n) + degree * Math.Log(n);
    }

    /// <summary>
    /// Weighted least squares on the coefficients c₁…c_d of f(t) = Σ cᵢ tⁱ from constraints
    /// Σ cᵢ (t_bⁱ − t_aⁱ) = Δ; c₀ makes f(x_ref) = 0. Null when the system is rank-deficient.
    /// </summary>
    internal static RepeatAxisFit? Solve(List<RepeatConstraint> used, int degree, double xRef, double xLo, double xHi)
    {
        var n = used.Count;
        if (n < degree) return null;
        var lo = used.Min(c => c.FirstX);
        var hi = used.Max(c => c.RepeatX);
        var centre = 0.5 * (lo + hi);
        var half = 0.5 * (hi - lo);
        if (!(half > 0)) return null;
        var a = Matrix<double>.Build.Dense(n, degree);
        var b = Vector<double>.Build.Dense(n);
        for (var k = 0; k < n; k++)
        {
            var c = used[k];
            var w = 1 / c.Sigma;
            var ta = (c.FirstX - centre) / half;
            var tb = (c.RepeatX - centre) / half;
            double pa = ta, pb = tb;
            for (var i = 1; i <= degree; i++)
            {
                a[k, i - 1] = w * (pb - pa);
                pa *= ta;
                pb *= tb;
            }

            b[k] = w * c.Delta;
        }

        return SolveDesign(a, b, degree, xRef, centre, half, lo, hi);
    }

    /// <summary>
    /// Solves the weighted design <paramref name="a"/>·c = <paramref name="b"/> (by thin QR) whose first
    /// <paramref name="degree"/> columns are the shape coefficients c₁…c_d of the axis on t = (x − centre)/half (further
    /// columns are nuisance unknowns); c₀ makes f(<paramref name="xRef"/>) = 0. Also gives the shape covariance (scaled by
    /// χ² per degree of freedom), its RMS over the range, each row's leverage and the leave-one-out error (PRESS).
    /// Null when the design is rank-deficient.
    /// </summary>
    internal static RepeatAxisFit? SolveDesign(Matrix<double> a, Vector<double> b, int degree, double xRef, double centre, double half, double lo, double hi)
    {
        var n = a.RowCount;
        var cols = a.ColumnCount;
        var qr = a.QR(MathNet.Numerics.LinearAlgebra.Factorization.QRMethod.Thin);
        var r = qr.R;
        for (var i = 0; i < cols; i++)
            if (Math.Abs(r[i, i]) < 1e-10 * Math.Abs(r[0, 0])) return null;
        var sol = qr.Solve(b);
        var coefficients = new double[degree + 1];
        for (var i = 1; i <= degree; i++) coefficients[i] = sol[i - 1];
        var tRef = (xRef - centre) / half;
        var c0 = 0.0;
        for (var i = degree; i >= 1; i--) c0 = (c0 + coefficients[i]) * tRef;
        coefficients[0] = -c0;
        var axis = new AxisPolynomial(coefficients, centre, half, lo, hi);
        var resid = a * sol - b;
        var chi = resid.DotProduct(resid);
        var (sigma, shapeCovariance) = ShapeUncertainty(a, chi, n - cols, degree);

        // leverage of each constraint (diagonal of the hat matrix): an edge pair can bend the polynomial to itself
        var q = qr.Q;
        var leverage = new double[n];
        for (var k = 0; k < n; k++)
        {
            var h = 0.0;
            for (var j = 0; j < cols; j++) h += q[k, j] * q[k, j];
            leverage[k] = Math.Min(h, 0.99);
        }

        // leave-one-out prediction error (PRESS): each constraint predicted by the fit to all the others
        var press = 0.0;
        for (var k = 0; k < n; k++) press += Math.Pow(resid[k] / (1 - leverage[k]), 2);
        return new RepeatAxisFit(axis, chi, sigma, leverage, press) { ShapeCovariance = shapeCovariance };
    }

    /// <summary>Uncertainty of the axis shape (constant removed): the covariance of c₁…c_d, (AᵀA)⁻¹ scaled by χ²/dof (by 1
    /// without a degree of freedom, when the covariance is not reported), and its RMS over the calibrated range.</summary>
    private static (double Sigma, double[]? ShapeCovariance) ShapeUncertainty(Matrix<double> a, double chi, int dof, int degree)
    {
        try
        {
            var cov = a.TransposeThisAndMultiply(a).Inverse() * (dof > 0 ? chi / dof : 1.0);
            if (!cov.Enumerate().All(double.IsFinite)) return (double.NaN, null);
            var flat = new double[degree * degree];
            for (var i = 0; i < degree; i++)
            for (var j = 0; j < degree; j++)
                flat[i * degree + j] = cov[i, j];
            return (AxisPolynomial.ShapeSigmaRms(flat, degree), dof > 0 ? flat : null);
        }
        catch (Exception e) when (e is ArgumentException or InvalidOperationException)
        {
            return (double.NaN, null);
        }
    }
}
