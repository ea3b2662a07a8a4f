using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using Xunit;

namespace OrderUnfold.Tests.Inversion;

/// <summary>The sweep operator with transverse families in the instrument response. Scans, spectra and residuals are
/// random (simulated) test data.</summary>
public class FamilyResponseTests
{
    private static readonly Instrument Cavity = Instrument.FromLength("A", 0.055, CavityGeometry.Planar, 140) with
    {
        Families = [new CavityModeFamily(1, 0.5319, 1.85, "test"), new CavityModeFamily(2, 0.0638, 0.22, "test")],
    };

    private static double[] Scan(Random rng, int samples, double fsr)
    {
        var start = (rng.NextDouble() - 0.5) * 6 * fsr;
        return Enumerable.Range(0, samples).Select(i => start + 3.3 * fsr * i / (samples - 1.0)).ToArray();
    }

    [Fact]
    public void A_line_is_modelled_with_its_families_where_the_instrument_response_puts_them()
    {
        // one grid line: the model must equal Instrument.Response(ν − φ − f) (Airy peak + families) within the
        // operator's linear interpolation (1 % of the TEM00 peak, as for the Airy function alone)
        var fsr = Cavity.FsrHz;
        var lw = Cavity.LinewidthHz;
        var grid = new FrequencyGrid(0.37e9 - 100 * lw / 4, lw / 4, 200);
        var scan = Scan(new Random(3), 8000, fsr);
        const double phi = 0.05e9;
        var op = new SweepOperator(Cavity, scan, grid, phi, lw / 20);
        var s = new double[grid.Count];
        s[100] = 1;
        var y = op.Forward(s);
        var worst = 0.0;
        for (var i = 0; i < scan.Length; i++) worst = Math.Max(worst, Math.Abs(y[i] - Cavity.Response(grid[100] - phi - scan[i])));
        Assert.True(worst < 0.01 * 1.85, $"largest difference {worst:G3}");
    }

    [Fact]
    public void The_adjoint_with_families_passes_the_dot_product_test_and_the_unit_norm_matches()
    {
        var rng = new Random(11);
        var fsr = Cavity.FsrHz;
        var lw = Cavity.LinewidthHz;
        for (var trial = 0; trial < 10; trial++)
        {
            var bins = 50 + rng.Next(800);
            var grid = new FrequencyGrid((rng.NextDouble() - 0.5) * 10 * fsr, lw * (0.2 + rng.NextDouble()), bins);
            var scan = Scan(rng, 500 + rng.Next(2000), fsr);
            var op = new SweepOperator(Cavity, scan, grid, (rng.NextDouble() - 0.5) * fsr, lw / 10);
            var s = Enumerable.Range(0, bins).Select(_ => rng.NextDouble() - 0.5).ToArray();
            var r = Enumerable.Range(0, scan.Length).Select(_ => rng.NextDouble() - 0.5).ToArray();
            var a = op.Forward(s);
            var atr = new double[bins];
            op.AdjointAdd(r, atr);
            var lhs = a.Zip(r, (u, v) => u * v).Sum();
            var rhs = s.Zip(atr, (u, v) => u * v).Sum();
            var scale = Math.Sqrt(a.Sum(v => v * v) * r.Sum(v => v * v));
            Assert.True(Math.Abs(lhs - rhs) <= 1e-10 * scale, $"<As,r> = {lhs}, <s,Aᵀr> = {rhs}");
            var j = rng.Next(bins);
            var unit = new double[bins];
            unit[j] = 1;
            var col = op.Forward(unit);
            var expected = col.Sum(v => v * v);
            Assert.Equal(expected, op.UnitNormSquared(j, new double[op.M]), expected * 1e-9);
        }
    }
}
