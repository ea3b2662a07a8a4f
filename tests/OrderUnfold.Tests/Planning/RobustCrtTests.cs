using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using Xunit;

namespace OrderUnfold.Tests.Planning;

/// <summary>
/// The planner's margin rule against the error bound of robust remainder-based reconstruction.
/// </summary>
/// <remarks>
/// Robust Chinese remainder theorem (recalled from memory of Li, Liang and Xia, IEEE Trans. Signal Processing, 2009,
/// not checked against the paper): with moduli M_i = M·Γ_i, the Γ_i pairwise coprime, a number below
/// lcm(M_i) = M·ΠΓ_i can be recovered from remainders each in error by less than M/4, with a reconstruction error no
/// larger than the remainder error.
///
/// The planner's rule in the same terms: an instrument measures a frequency modulo its FSR (a remainder) with a
/// position error τ. Two frequencies Δ apart give remainders that can be made equal by errors of τ in each
/// instrument exactly when every distance from Δ to a multiple of FSR_i is at most 2τ, i.e. when the alias margin
/// (in absolute units) is at most 2τ. So the planner calls a range unambiguous for errors τ when its worst alias
/// margin exceeds 2τ.
///
/// What is compared: (1) the planner's worst alias for FSR_i = M·Γ_i over (0, lcm) is exactly M/2, so its rule
/// tolerates τ &lt; M/4, the bound recalled above; (2) brute-force decoding (every candidate on a fine grid whose
/// remainders all lie within τ of the measured ones) is unique up to 2τ for errors just below M/4, and finds a far
/// alias, at the planner's worst shift, for errors just above it. The numbers are invented (simulated).
/// </remarks>
public class RobustCrtTests
{
    private const double M = 1e9; // common factor of the moduli, Hz
    private static readonly int[] Gamma = [5, 7]; // coprime
    private static readonly double Lcm = M * 5 * 7;

    // equal linewidths (FSR_i / finesse_i = M/100) so that margins in linewidths are absolute distances / (M/100)
    private static readonly Instrument[] Moduli = Gamma.Select(g => new Instrument($"M·{g}", M * g, 100.0 * g)).ToArray();
    private static readonly double Linewidth = M / 100;

    [Fact]
    public void PlannersWorstAliasIsHalfTheCommonFactorSoItToleratesAQuarter()
    {
        // the margin is symmetric about lcm/2 (margin(Δ) = margin(lcm − Δ)), so (0, lcm) is covered by [a few linewidths, lcm/2];
        // the flank of the line itself at Δ = 0 is left out
        var worst = AliasMargin.LowestAlias(Moduli, 3 * Linewidth, Lcm / 2);
        Assert.Equal(M / 2, worst.MarginLinewidths * Linewidth, 1e-3);
        var toleratedError = worst.MarginLinewidths * Linewidth / 2;
        Assert.Equal(M / 4, toleratedError, 1e-3);
        // and the first common period is the lcm: 7·FSR₁ = 5·FSR₂
        Assert.Equal(Lcm, AliasMargin.FindRepeat(Moduli, [0, 1e-12], 1000)!.RepeatHz, 1e-3);
    }

    [Fact]
    public void BruteForceDecodingIsUniqueBelowAQuarterAndAmbiguousAbove()
    {
        var worst = AliasMargin.LowestAlias(Moduli, 3 * Linewidth, Lcm / 2);
        var rng = new Random(3);

        // errors up to 0.95·M/4: every admissible candidate lies within 2τ of the true number
        var tau = 0.95 * M / 4;
        for (var trial = 0; trial < 20; trial++)
        {
            var n = rng.NextDouble() * Lcm;
            var measured = Moduli.Select(m => Mod(n + (2 * rng.NextDouble() - 1) * tau, m.FsrHz)).ToArray();
            var admissible = Admissible(measured, tau);
            Assert.NotEmpty(admissible);
            Assert.All(admissible, x => Assert.True(CircularDistance(x, n, Lcm) <= 2 * tau + M * 1e-3));
        }

        // errors of 1.05·M/4, chosen adversarially: a number and the number shifted by the planner's worst Δ give the
        // same measured remainders, so an admissible candidate lies a whole alias away
        tau = 1.05 * M / 4;
        var n0 = 3.3e9;
        var n1 = n0 + worst.DeltaHz;
        var shared = Moduli.Select(m =>
        {
            // the midpoint (on the circle of this modulus) between the two true remainders
            var r0 = Mod(n0, m.FsrHz);
            var d = Mod(n1 - n0 + m.FsrHz / 2, m.FsrHz) - m.FsrHz / 2; // signed distance in (−FSR/2, FSR/2]
            return Mod(r0 + d / 2, m.FsrHz);
        }).ToArray();
        var set = Admissible(shared, tau);
        Assert.Contains(set, x => CircularDistance(x, n0, Lcm) <= 2 * tau);
        Assert.Contains(set, x => CircularDistance(x, n1, Lcm) <= 2 * tau);
        Assert.True(CircularDistance(n0, n1, Lcm) > 4 * tau);
    }

    /// <summary>Every grid number in [0, lcm) whose remainders all lie within τ of the measured ones.</summary>
    private static List<double> Admissible(double[] measured, double tau)
    {
        var step = M / 2000;
        var list = new List<double>();
        for (var x = 0.0; x < Lcm; x += step)
        {
            var ok = true;
            for (var i = 0; i < Moduli.Length && ok; i++)
                ok = CircularDistance(Mod(x, Moduli[i].FsrHz), measured[i], Moduli[i].FsrHz) <= tau;
            if (ok) list.Add(x);
        }

        return list;
    }

    private static double Mod(double x, double m) => ((x % m) + m) % m;

    private static double CircularDistance(double a, double b, double period)
    {
        var d = Mod(a - b, period);
        return Math.Min(d, period - d);
    }
}
