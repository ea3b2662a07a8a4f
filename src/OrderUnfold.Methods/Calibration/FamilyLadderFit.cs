using MathNet.Numerics.LinearAlgebra;

namespace OrderUnfold.Calibration;

/// <summary>The axis refitted to every peak of one source line and its transverse families at once.</summary>
internal sealed record Ladder(RepeatAxisFit Fit, List<DegreeScore> Scores, int Points, string Note)
{
    /// <summary>χ² per degree of freedom of the chosen degree (points − degree − 2 unknowns).</summary>
    public double ReducedChiSquare => Fit.ChiSquare / Math.Max(1, Points - Fit.Axis.Degree - 2);
}

/// <summary>The axis refitted to the transverse families on their Gouy ladder.</summary>
internal static class FamilyLadderFit
{
    /// <summary>
    /// Refits the axis to the peaks of a single source line and its transverse families on a Gouy ladder. Family N lies
    /// N·o₁ (mod 1) of an FSR from TEM00 (Siegman, <i>Lasers</i>, 1986, ch. 19), so with apparent offsets a_N = N·a₁ − m_N
    /// (m_N whole) every labelled peak i of order k_i and family N_i satisfies f(x_i) = C + FSR·(k_i − m_N) + N_i·A with
    /// two unknowns shared by all peaks (C, the origin; A = FSR·a₁). Repeat pairs use only the distance between equal
    /// families of neighbouring orders; here a family N ≥ 2 next to TEM00 (or next to N = 1) also measures the local slope
    /// of the axis, which pins the shape of a piezo's cubic that a few pairs clustered at two places along the sweep leave
    /// nearly free. Linear least squares in the polynomial's shape coefficients, C and A, weighted by each peak's position
    /// uncertainty; the degree is chosen by leave-one-out cross-validation as for the pairs (at least two degrees of
    /// freedom). Null when the families do not form a ladder with a rung N ≥ 2, when fewer than three families have peaks,
    /// or when no monotone fit results.
    /// </summary>
    internal static Ladder? LadderFit(PairingRun chosen, PeriodDecision decision, List<DetectedPeak> peaks, Sweep sweep, SelfCalibrationOptions options, double period,
        double xLo, double xHi)
    {
        if (decision.FundamentalPhase is not double basePhase || chosen.Fit is null) return null;
        var rungs = Rungs(decision);
        if (rungs is null) return null;
        var pts = LabelledPeaks(chosen.Fit.Axis, peaks, rungs, basePhase, decision.Tolerance, period, xLo);
        if (pts.Select(q => q.N).Distinct().Count() < 3) return null;
        var n = pts.Count;
        var lo = pts[0].X;
        var hi = pts[^1].X;
        var centre = 0.5 * (lo + hi);
        var half = 0.5 * (hi - lo);
        if (!(half > 0)) return null;
        var maxDegree = Math.Min(options.MaxDegree, n - 4); // d shape coefficients + C + A, at least two degrees of freedom
        var fits = new List<RepeatAxisFit>();
        var scores = new List<DegreeScore>();
        for (var deg = 1; deg <= maxDegree; deg++)
        {
            var (a, b) = Design(pts, deg, centre, half, period);
            var fit = RepeatAxisFitting.SolveDesign(a, b, deg, sweep.X[0], centre, half, lo, hi);
            if (fit is null) break;
            var mono = fit.Axis.IsMonotone(lo, hi, 801);
            scores.Add(new DegreeScore(deg, fit.ChiSquare, RepeatAxisFitting.Bic(fit.ChiSquare, n, deg, period), fit.Press, mono));
            if (mono && double.IsFinite(fit.Press)) fits.Add(fit);
        }

        if (fits.Count == 0) return null;
        var minPress = fits.Min(f => f.Press);
        var chosenFit = fits.First(f => f.Press <= 1.05 * minPress + 1e-12);
        var dof = n - chosenFit.Axis.Degree - 2;
        var note = $"{n} peaks of {pts.Select(q => q.N).Distinct().Count()} families, reduced χ² {chosenFit.ChiSquare / dof:G3}";
        return new Ladder(chosenFit, scores, n, note);
    }

    /// <summary>The rungs a_N = N·a₁ − m_N of the families (TEM00 first); a family off its rung by more than the grouping
    /// tolerance is not used. Null without family 1 or without a rung N ≥ 2.</summary>
    private static List<(int N, double A, int M)>? Rungs(PeriodDecision decision)
    {
        var one = decision.Families.FirstOrDefault(f => f.N == 1);
        if (one is null) return null;
        var rungs = new List<(int N, double A, int M)> { (0, 0, 0) };
        foreach (var fam in decision.Families.Where(f => f.N >= 1))
        {
            var off = fam.N * one.ApparentOffsetFsr - fam.ApparentOffsetFsr;
            var m = (int)Math.Round(off);
            if (Math.Abs(off - m) <= decision.Tolerance) rungs.Add((fam.N, fam.ApparentOffsetFsr, m));
        }

        return rungs.Any(r => r.N >= 2) ? rungs : null;
    }

    /// <summary>Each peak labelled with its family N, order K and rung shift M (the nearest rung within the tolerance), with
    /// its position uncertainty in Hz; one peak per label (two peaks claiming one label are both left out), sorted by x.</summary>
    private static List<(double X, int N, int K, int M, double Sigma)> LabelledPeaks(AxisPolynomial axis, List<DetectedPeak> peaks,
        List<(int N, double A, int M)> rungs, double basePhase, double tol, double period, double xLo)
    {
        var f0 = axis.Evaluate(xLo);
        var labelled = new List<(double X, int N, int K, int M, double Sigma)>();
        foreach (var p in peaks)
        {
            var u = (axis.Evaluate(p.X) - f0) / period;
            (int N, int K, int M, double D)? best = null;
            foreach (var r in rungs)
            {
                var v = u - basePhase - r.A;
                var k = (int)Math.Round(v);
                var d = Math.Abs(v - k);
                if (d <= tol && (best is null || d < best.Value.D)) best = (r.N, k, r.M, d);
            }

            if (best is { } l) labelled.Add((p.X, l.N, l.K, l.M, Math.Max(p.SigmaX * Math.Abs(axis.Derivative(p.X)), 1e-9 * period)));
        }

        return labelled.GroupBy(q => (q.N, q.K)).Where(g => g.Count() == 1).Select(g => g.First()).OrderBy(q => q.X).ToList();
    }

    /// <summary>Weighted design of f(x_i) − C − N_i·A = FSR·(K_i − M_i): columns t¹…t^d, then C and A.</summary>
    private static (Matrix<double> A, Vector<double> B) Design(List<(double X, int N, int K, int M, double Sigma)> pts, int deg, double centre, double half, double period)
    {
        var n = pts.Count;
        var a = Matrix<double>.Build.Dense(n, deg + 2);
        var b = Vector<double>.Build.Dense(n);
        for (var i = 0; i < n; i++)
        {
            var q = pts[i];
            var w = 1 / q.Sigma;
            var t = (q.X - centre) / half;
            var pw = t;
            for (var j = 0; j < deg; j++)
            {
                a[i, j] = w * pw;
                pw *= t;
            }

            a[i, deg] = w;
            a[i, deg + 1] = w * q.N;
            b[i] = w * period * (q.K - q.M);
        }

        return (a, b);
    }
}
