namespace OrderUnfold.Calibration;

/// <summary>Finds the repeat of each peak one period later on the current axis, and turns a calibration sweep into intervals.</summary>
internal static class RepeatMatching
{
    internal static List<RepeatConstraint> Match(List<DetectedPeak> peaks, AxisPolynomial axis, double delta, double widthFactor, double axisRmsHz, double shapeTolerance,
        double xLo, double xHi, HeightModel? heights = null)
    {
        var xsSorted = peaks.Select(p => p.X).ToArray();
        var byB = new Dictionary<int, (RepeatConstraint Pair, double Distance)>();
        for (var a = 0; a < peaks.Count; a++)
        {
            var pa = peaks[a];
            var fa = axis.Evaluate(pa.X);
            var target = fa + delta;
            var xt = SelfCalibrator.Inverse(axis, target, xLo, xHi);
            if (xt is not double x || x <= pa.X) continue;
            var slope = Math.Abs(axis.Derivative(x));
            if (!(slope > 0)) continue;
            var tol = widthFactor * pa.WidthX + 3 * axisRmsHz / slope;
            tol = Math.Min(tol, 0.1 * (x - pa.X));
            var lo = LowerBound(xsSorted, x - tol);
            int? best = null;
            double bestD = double.PositiveInfinity, secondD = double.PositiveInfinity;
            for (var b = lo; b < peaks.Count && peaks[b].X <= x + tol; b++)
            {
                if (b == a) continue;
                var pb = peaks[b];
                var hr = pb.Height / pa.Height;
                var wr = pb.WidthX / pa.WidthX;
                if (hr > shapeTolerance || hr < 1 / shapeTolerance || wr > shapeTolerance || wr < 1 / shapeTolerance) continue;
                if (heights is not null && !heights.Accepts(pa.X, hr)) continue;
                var d = Math.Abs(pb.X - x);
                if (d < bestD)
                {
                    secondD = bestD;
                    bestD = d;
                    best = b;
                }
                else if (d < secondD)
                {
                    secondD = d;
                }
            }

            if (best is not int bi) continue;
            if (secondD < 2 * bestD + 0.5 * pa.WidthX && secondD <= tol) continue; // two look-alikes in the window: ambiguous
            var pb2 = peaks[bi];
            var sigma = Math.Sqrt(Square(pa.SigmaX * Math.Abs(axis.Derivative(pa.X))) + Square(pb2.SigmaX * slope));
            var cand = new RepeatConstraint(a, bi, pa.X, pb2.X, pa.Height, pb2.Height, delta, Math.Max(sigma, 1e-9 * Math.Abs(delta)), "repeat");
            if (byB.TryGetValue(bi, out var have) && have.Distance <= bestD) continue;
            byB[bi] = (cand, bestD);
        }

        return byB.Values.Select(v => v.Pair).OrderBy(c => c.FirstX).ToList();
    }

    /// <summary>The calibration sweep's peaks as intervals between neighbours (each one known in Hz).</summary>
    internal static List<RepeatConstraint> CompanionPairs(AxisCalibration? companion, Instrument instrument)
    {
        if (companion is null || companion.PointCount < 2) return [];
        var order = Enumerable.Range(0, companion.PointCount).OrderBy(i => companion.PointX[i]).ToArray();
        var sigma = Math.Max(double.IsFinite(companion.ResidualRmsHz) ? companion.ResidualRmsHz : 0, 0.01 * instrument.LinewidthHz);
        var list = new List<RepeatConstraint>();
        for (var k = 1; k < order.Length; k++)
        {
            var i = order[k - 1];
            var j = order[k];
            list.Add(new RepeatConstraint(-100 - k, -100 - k, companion.PointX[i], companion.PointX[j], 1, 1, companion.PointHz[j] - companion.PointHz[i], sigma, "calibration"));
        }

        return list;
    }

    internal static int LowerBound(double[] sorted, double value)
    {
        int lo = 0, hi = sorted.Length;
        while (lo < hi)
        {
            var mid = (lo + hi) / 2;
            if (sorted[mid] < value) lo = mid + 1;
            else hi = mid;
        }

        return lo;
    }

    private static double Square(double v) => v * v;
}
