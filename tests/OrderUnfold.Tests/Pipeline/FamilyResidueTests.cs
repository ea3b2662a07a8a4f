using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using Xunit;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>
/// Weak lines on a family's peaks of a stronger line are left out as family residue when one cavity measured them. The
/// line lists here are hand-built (simulated numbers, not a measurement): a cavity of 3 GHz FSR and finesse 600 (linewidth
/// 5 MHz) with an N = 1 family at 0.512 FSR (35 %), measured at 0.511 and 0.513 on two axes.
/// </summary>
public sealed class FamilyResidueTests
{
    private const double Fsr = 3e9;

    private static Instrument Cavity(string name = "cav") =>
        new Instrument(name, Fsr, 600) { Families = [new CavityModeFamily(1, 1 - 0.512, 0.35, "measured")] };

    private static AxisCalibration Axis(string instrument, double measuredOffset) =>
        new(instrument, RampDirection.Up, "s", "test", new AxisPolynomial([0, 1], 0, 1, -1, 1), [], [], [], 0, null, null, [])
        {
            AxisSigmaHz = 50e3,
            PeriodDecision = new PeriodDecision(1, Fsr, Fsr, [], "test", [new CavityModeFamily(1, 1 - measuredOffset, 0.35, "measured")], "test"),
        };

    private static UnfoldResult Result(params (double Hz, double Intensity)[] lines) => new()
    {
        Grid = new FrequencyGrid(-Fsr / 2, 1e6, 3000),
        Spectrum = new double[3000],
        Lines = lines.Select(l => new UnfoldedLine(l.Hz, l.Intensity, l.Intensity, 100, 0, 0)).ToList(),
        Sweeps = [],
        Solver = new NnlsResult([], 0, 0, SolverStatus.Converged, "hand-built (test)", 0, 0),
    };

    [Fact]
    public void A_weak_line_on_the_family_of_a_stronger_one_is_left_out_and_named()
    {
        // 0.5135 FSR above the strong line: within spread 0.002 + axis 50 kHz + one linewidth (0.0017 FSR) of 0.512
        var (r, warning) = FamilyResidue.Apply(Result((0, 1), (0.5135 * Fsr - Fsr, 0.09)), [Cavity()], [Axis("cav", 0.511), Axis("cav", 0.513)]);
        Assert.Single(r.Lines);
        Assert.NotNull(warning);
        Assert.True(warning.Contains("residue of the cavity's transverse families", StringComparison.Ordinal) && warning.Contains("N=1", StringComparison.Ordinal));
    }

    [Theory]
    [InlineData(0.520, 0.09)] // off the family by 0.008 FSR (4.7 linewidths): a resolved line
    [InlineData(0.5125, 0.5)] // taller than the family itself: not its residue
    public void A_line_off_the_family_or_taller_than_it_stays(double offsetFsr, double intensity)
    {
        var (r, warning) = FamilyResidue.Apply(Result((0, 1), (offsetFsr * Fsr, intensity)), [Cavity()], [Axis("cav", 0.511), Axis("cav", 0.513)]);
        Assert.Equal(2, r.Lines.Count);
        Assert.Null(warning);
    }

    [Fact]
    public void With_two_cavities_the_joint_unfold_decides_and_nothing_is_left_out()
    {
        var (r, warning) = FamilyResidue.Apply(Result((0, 1), (0.5125 * Fsr, 0.09)), [Cavity("a"), Cavity("b")], [Axis("a", 0.512)]);
        Assert.Equal(2, r.Lines.Count);
        Assert.Null(warning);
    }
}
