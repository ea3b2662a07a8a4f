using System.Runtime.Intrinsics;
using System.Runtime.Intrinsics.X86;

namespace OrderUnfold.Inversion;

/// <summary>
/// The recursions behind <see cref="ToeplitzPreconditioner"/>: Durbin's recursion for the first column of the inverse of a
/// symmetric positive definite Toeplitz matrix (in double-double arithmetic, one operation at a time or four lanes at a
/// time), and the Trench recurrence that walks from one column of the inverse to its neighbour.
/// </summary>
internal static class ToeplitzRecursions
{
    /// <summary>Lanes of the vectorised recursion (doubles in a 256-bit register).</summary>
    private const int Lanes = 4;

    /// <summary>x = T⁻¹e₀ for the symmetric Toeplitz matrix with first column t, by Durbin's recursion on the Yule–Walker
    /// equations of t/t₀ (Golub &amp; Van Loan Alg. 4.7.1); null when a reflection coefficient reaches 1 (T not positive
    /// definite). The recursion runs in double-double arithmetic (about 32 digits; T. J. Dekker, "A floating-point technique
    /// for extending the available precision", Numer. Math. 18, 224–242, 1971): the grid's Toeplitz matrix has condition
    /// numbers near 10⁹, where plain double precision leaves relative errors near 10⁻⁷ in x and the Gohberg–Semencul
    /// inverse built from it is then indefinite in the directions the data see best.</summary>
    public static double[]? InverseFirstColumn(double[] t) =>
        Fma.IsSupported && Vector256.IsHardwareAccelerated ? InverseFirstColumnVector(t) : InverseFirstColumnScalar(t);

    /// <summary><see cref="InverseFirstColumn"/> with one double-double operation at a time.</summary>
    public static double[]? InverseFirstColumnScalar(double[] t)
    {
        if (!TryStart(t, out var x, out var rh, out var rl)) return null;
        var m = rh.Length;
        if (m == 0) return x;
        var yh = new double[m];
        var yl = new double[m];
        yh[0] = -rh[0];
        yl[0] = -rl[0];
        double betaH = 1, betaL = 0;
        double alphaH = -rh[0], alphaL = -rl[0];
        if (!(Math.Abs(alphaH) < 1)) return null;
        for (var k = 1; k < m; k++)
        {
            if (!ShrinkBeta(alphaH, alphaL, ref betaH, ref betaL)) return null;
            // s = r_k + Σ r_{k−1−i} y_i
            double sh = rh[k], sl = rl[k];
            for (var i = 0; i < k; i++)
            {
                Mul(rh[k - 1 - i], rl[k - 1 - i], yh[i], yl[i], out var ph, out var pl);
                Add(sh, sl, ph, pl, out sh, out sl);
            }

            if (!TryReflection(sh, sl, betaH, betaL, out alphaH, out alphaL)) return null;
            UpdateInPlace(alphaH, alphaL, yh, yl, k);
            yh[k] = alphaH;
            yl[k] = alphaL;
        }

        return Finish(t, rh, rl, yh, yl, x);
    }

    /// <summary>
    /// <see cref="InverseFirstColumn"/> with four double-double operations at a time (AVX2 with fused multiply-add). The
    /// recursion keeps y and its reversal R (R_i = y_{k−1−i}) side by side, so that both inner loops run forward over
    /// contiguous memory: the sum Σ r_{k−1−i} y_i is Σ r_i R_i, and the update y_i ← y_i + α R_i comes with
    /// R'_{i+1} = R_i + α y_i, R'_0 = α. Same recursion and precision as the scalar version, other rounding order.
    /// </summary>
    public static double[]? InverseFirstColumnVector(double[] t)
    {
        if (!TryStart(t, out var x, out var rh, out var rl)) return null;
        var m = rh.Length;
        if (m == 0) return x;
        var yh = new double[m];
        var yl = new double[m];
        var bh = new double[m + 1];
        var bl = new double[m + 1];
        var ch = new double[m + 1];
        var cl = new double[m + 1];
        yh[0] = -rh[0];
        yl[0] = -rl[0];
        bh[0] = yh[0];
        bl[0] = yl[0];
        double betaH = 1, betaL = 0;
        double alphaH = -rh[0], alphaL = -rl[0];
        if (!(Math.Abs(alphaH) < 1)) return null;
        for (var k = 1; k < m; k++)
        {
            if (!ShrinkBeta(alphaH, alphaL, ref betaH, ref betaL)) return null;
            SumVector(rh, rl, bh, bl, k, out var sh, out var sl);
            if (!TryReflection(sh, sl, betaH, betaL, out alphaH, out alphaL)) return null;
            UpdateVector(alphaH, alphaL, yh, yl, bh, bl, ch, cl, k);
            ch[0] = alphaH;
            cl[0] = alphaL;
            yh[k] = alphaH;
            yl[k] = alphaL;
            (bh, ch) = (ch, bh);
            (bl, cl) = (cl, bl);
        }

        return Finish(t, rh, rl, yh, yl, x);
    }

    /// <summary>The recursion's set-up: false when t₀ is not positive and finite; else x with x₀ = 1/t₀ (the whole answer
    /// for n = 1) and r_i = t_{i+1} / t₀ in double-double (length n − 1).</summary>
    private static bool TryStart(double[] t, out double[] x, out double[] rh, out double[] rl)
    {
        var n = t.Length;
        x = [];
        rh = [];
        rl = [];
        if (!(t[0] > 0) || !double.IsFinite(t[0])) return false;
        x = new double[n];
        x[0] = 1 / t[0];
        if (n == 1) return true;
        var m = n - 1;
        rh = new double[m];
        rl = new double[m];
        for (var i = 0; i < m; i++)
        {
            var q = t[i + 1] / t[0];
            rh[i] = q;
            rl[i] = Math.FusedMultiplyAdd(-q, t[0], t[i + 1]) / t[0];
        }

        return true;
    }

    /// <summary>β ← β (1 − α²); false when β is no longer positive.</summary>
    private static bool ShrinkBeta(double alphaH, double alphaL, ref double betaH, ref double betaL)
    {
        Mul(alphaH, alphaL, alphaH, alphaL, out var a2h, out var a2l);
        Add(1, 0, -a2h, -a2l, out var oh, out var ol);
        Mul(betaH, betaL, oh, ol, out betaH, out betaL);
        return betaH > 0;
    }

    /// <summary>The next reflection coefficient α = −s / β; false when |α| reaches 1 or is not finite.</summary>
    private static bool TryReflection(double sh, double sl, double betaH, double betaL, out double alphaH, out double alphaL)
    {
        Div(-sh, -sl, betaH, betaL, out alphaH, out alphaL);
        return Math.Abs(alphaH) < 1 && double.IsFinite(alphaH);
    }

    /// <summary>y_i ← y_i + α y_{k−1−i} for i &lt; k, in place by symmetric pairs.</summary>
    private static void UpdateInPlace(double alphaH, double alphaL, double[] yh, double[] yl, int k)
    {
        for (int i = 0, j = k - 1; i <= j; i++, j--)
        {
            Mul(alphaH, alphaL, yh[j], yl[j], out var pih, out var pil);
            if (i == j)
            {
                Add(yh[i], yl[i], pih, pil, out yh[i], out yl[i]);
                continue;
            }

            Mul(alphaH, alphaL, yh[i], yl[i], out var pjh, out var pjl);
            Add(yh[i], yl[i], pih, pil, out yh[i], out yl[i]);
            Add(yh[j], yl[j], pjh, pjl, out yh[j], out yl[j]);
        }
    }

    /// <summary>s = r_k + Σ_{i&lt;k} r_i R_i, four lanes at a time, the lanes then the tail added in order.</summary>
    private static void SumVector(double[] rh, double[] rl, double[] bh, double[] bl, int k, out double sh, out double sl)
    {
        var accH = Vector256<double>.Zero;
        var accL = Vector256<double>.Zero;
        var i = 0;
        for (; i + Lanes <= k; i += Lanes)
        {
            var ah = Vector256.Create(rh, i);
            var al = Vector256.Create(rl, i);
            var vh = Vector256.Create(bh, i);
            var vl = Vector256.Create(bl, i);
            MulV(ah, al, vh, vl, out var ph, out var pl);
            AddV(accH, accL, ph, pl, out accH, out accL);
        }

        sh = rh[k];
        sl = rl[k];
        for (var lane = 0; lane < Lanes; lane++) Add(sh, sl, accH.GetElement(lane), accL.GetElement(lane), out sh, out sl);
        for (; i < k; i++)
        {
            Mul(rh[i], rl[i], bh[i], bl[i], out var ph, out var pl);
            Add(sh, sl, ph, pl, out sh, out sl);
        }
    }

    /// <summary>y_i ← y_i + α R_i and R'_{i+1} = R_i + α y_i (into c) for i &lt; k, four lanes at a time.</summary>
    private static void UpdateVector(double alphaH, double alphaL, double[] yh, double[] yl, double[] bh, double[] bl,
        double[] ch, double[] cl, int k)
    {
        var vah = Vector256.Create(alphaH);
        var val = Vector256.Create(alphaL);
        var i = 0;
        for (; i + Lanes <= k; i += Lanes)
        {
            var y0h = Vector256.Create(yh, i);
            var y0l = Vector256.Create(yl, i);
            var r0h = Vector256.Create(bh, i);
            var r0l = Vector256.Create(bl, i);
            MulV(vah, val, r0h, r0l, out var ph, out var pl);
            AddV(y0h, y0l, ph, pl, out var nyh, out var nyl);
            MulV(vah, val, y0h, y0l, out var qh, out var ql);
            AddV(r0h, r0l, qh, ql, out var nrh, out var nrl);
            nyh.CopyTo(yh, i);
            nyl.CopyTo(yl, i);
            nrh.CopyTo(ch, i + 1);
            nrl.CopyTo(cl, i + 1);
        }

        for (; i < k; i++)
        {
            Mul(alphaH, alphaL, bh[i], bl[i], out var ph, out var pl);
            Mul(alphaH, alphaL, yh[i], yl[i], out var qh, out var ql);
            Add(bh[i], bl[i], qh, ql, out ch[i + 1], out cl[i + 1]);
            Add(yh[i], yl[i], ph, pl, out yh[i], out yl[i]);
        }
    }

    /// <summary>The recursion's finish: x = (1, y) / (t₀ · (1 + rᵀy)); null when the denominator is not positive.</summary>
    private static double[]? Finish(double[] t, double[] rh, double[] rl, double[] yh, double[] yl, double[] x)
    {
        var m = rh.Length;
        double dh = 1, dl = 0;
        for (var i = 0; i < m; i++)
        {
            Mul(rh[i], rl[i], yh[i], yl[i], out var ph, out var pl);
            Add(dh, dl, ph, pl, out dh, out dl);
        }

        if (!(dh > 0)) return null;
        Mul(dh, dl, t[0], 0, out var ch, out var cl);
        Div(1, 0, ch, cl, out var scaleH, out var scaleL);
        x[0] = scaleH + scaleL;
        for (var i = 0; i < m; i++)
        {
            Mul(yh[i], yl[i], scaleH, scaleL, out var vh, out var vl);
            x[i + 1] = vh + vl;
        }

        return x;
    }

    /// <summary>Column <paramref name="from"/> of T⁻¹ in <paramref name="c"/> → column <paramref name="j"/>, by the Trench
    /// recurrence, from x = T⁻¹e₀ (see <see cref="ToeplitzPreconditioner.ToeplitzInverseColumn"/>).</summary>
    public static void WalkColumn(double[] x, Span<double> c, int from, int j)
    {
        var n = x.Length;
        var inv = 1 / x[0];
        // x̂_i = x_{n−i} for i ≥ 1, x̂₀ = 0
        for (var k = from; k < j; k++)
        {
            // column k → k + 1: c[i] ← c[i − 1] + (x_i x_{k+1} − x̂_i x̂_{k+1}) / x₀, c[0] = x_{k+1}
            var xk = x[k + 1] * inv;
            var xh = x[n - k - 1] * inv;
            for (var i = n - 1; i >= 1; i--) c[i] = c[i - 1] + x[i] * xk - x[n - i] * xh;
            c[0] = x[k + 1];
        }

        for (var k = from; k > j; k--)
        {
            // column k → k − 1: c[i − 1] ← c[i] − (x_i x_k − x̂_i x̂_k) / x₀, c[n − 1] = (T⁻¹)[n − k, 0] = x_{n−k}
            var xk = x[k] * inv;
            var xh = x[n - k] * inv;
            for (var i = 1; i < n; i++) c[i - 1] = c[i] - x[i] * xk + x[n - i] * xh;
            c[n - 1] = x[n - k];
        }
    }

    private static void AddV(Vector256<double> ah, Vector256<double> al, Vector256<double> bh, Vector256<double> bl,
        out Vector256<double> rh, out Vector256<double> rl)
    {
        var s = ah + bh;
        var bb = s - ah;
        var e = (ah - (s - bb)) + (bh - bb) + al + bl;
        rh = s + e;
        rl = e - (rh - s);
    }

    private static void MulV(Vector256<double> ah, Vector256<double> al, Vector256<double> bh, Vector256<double> bl,
        out Vector256<double> rh, out Vector256<double> rl)
    {
        var p = ah * bh;
        var e = Fma.MultiplySubtract(ah, bh, p) + (ah * bl + al * bh);
        rh = p + e;
        rl = e - (rh - p);
    }

    // double-double arithmetic: a value is hi + lo with |lo| ≤ ½ ulp(hi) (Dekker 1971; error-free products by fused multiply-add)
    private static void Add(double ah, double al, double bh, double bl, out double rh, out double rl)
    {
        var s = ah + bh;
        var bb = s - ah;
        var e = (ah - (s - bb)) + (bh - bb) + al + bl;
        rh = s + e;
        rl = e - (rh - s);
    }

    private static void Mul(double ah, double al, double bh, double bl, out double rh, out double rl)
    {
        var p = ah * bh;
        var e = Math.FusedMultiplyAdd(ah, bh, -p) + (ah * bl + al * bh);
        rh = p + e;
        rl = e - (rh - p);
    }

    private static void Div(double ah, double al, double bh, double bl, out double rh, out double rl)
    {
        var q1 = ah / bh;
        Mul(q1, 0, bh, bl, out var ph, out var pl);
        Add(ah, al, -ph, -pl, out var dh, out var dl);
        var q2 = (dh + dl) / bh;
        rh = q1 + q2;
        rl = q2 - (rh - q1);
    }
}
