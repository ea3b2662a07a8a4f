using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using Xunit;

namespace OrderUnfold.Tests.Pipeline;

/// <summary>
/// The settlement stage hands on new instruments and axes and leaves what it was given as it was (hand-built instruments
/// and axes; simulated numbers: a 3 GHz cavity of finesse 600 whose FSR the refinement moves by +0.5 %).
/// </summary>
public sealed class InstrumentSettlementTests
{
    private const double Fsr = 3e9;

    private static AxisCalibration Axis(string instrument) =>
        new(instrument, RampDirection.Up, "s", "calibration sweep", new AxisPolynomial([0, Fsr], 0, 1, -1, 1), [], [], [], 0, null, null, []);

    private static FsrRefinement Refinement(params InstrumentScale[] scales) => new(scales, [], 1, 1, 1, [], [], []);

    [Fact]
    public void The_decided_FSR_gives_new_instruments_and_axes_and_leaves_the_settled_ones_unchanged()
    {
        var cavity = new Instrument("cav", Fsr, 600);
        var other = new Instrument("other", 2 * Fsr, 600);
        var axes = new List<AxisCalibration> { Axis("cav"), Axis("other") };
        var settled = new SettledInstruments(new Dictionary<string, Instrument> { ["cav"] = cavity, ["other"] = other }, axes, []);
        var refined = InstrumentSettlement.WithDecidedFsr(settled, Refinement(
            new InstrumentScale("cav", Fsr, 1.005 * Fsr, 1e5, 0.005, "known interval"),
            new InstrumentScale("other", 2 * Fsr, 2 * Fsr, 0, 0, "reference (stated FSR)")));

        Assert.Equal(1.005 * Fsr, refined.Instruments["cav"].FsrHz, 1e-6);
        Assert.Same(other, refined.Instruments["other"]);
        // the axis of the cavity is put at the decided FSR: its slope (Hz per unit x) scales with it
        Assert.Equal(1.005 * Fsr, refined.Calibrations[0].Axis.Derivative(0.5), 1e-3);
        Assert.Contains("FSR refined by +0.500 %", refined.Calibrations[0].Method, StringComparison.Ordinal);
        Assert.Same(axes[1], refined.Calibrations[1]);
        // nothing handed in was changed
        Assert.Same(cavity, settled.Instruments["cav"]);
        Assert.Equal(Fsr, axes[0].Axis.Derivative(0.5), 1e-3);
        Assert.Equal("calibration sweep", axes[0].Method);
    }

    private static PeriodDecision Decision(double periodHz, double fittedPeriodHz) =>
        new(0.1, periodHz, fittedPeriodHz, [new PeriodCandidateScore("chosen", 0.1, 1, 6, 1, 1, true, true)], "simulated decision", [], "tallest group");

    [Fact]
    public void Every_axis_is_converted_once_to_the_FSR_the_patterns_decided()
    {
        // a source sweep whose pattern decided twice the stated FSR (a confocal cavity that is not degenerate) and a
        // calibration-sweep axis of the same cavity, both built at the stated FSR
        var fromRepeats = Axis("cav") with { BuiltAtFsrHz = Fsr, PeriodDecision = Decision(2 * Fsr, Fsr), FromRepeats = true };
        var fromCalibration = Axis("cav") with { BuiltAtFsrHz = Fsr };
        var cavity = CalibrationSteps.SettleCavityProperties(new Dictionary<string, Instrument> { ["cav"] = new Instrument("cav", Fsr, 600) }, [fromRepeats, fromCalibration]);
        Assert.Equal(2 * Fsr, cavity.Instruments["cav"].FsrHz);
        Assert.All(cavity.Calibrations, c => Assert.Equal(2 * Fsr, c.Axis.Derivative(0.5), 1e-3));
        Assert.All(cavity.Calibrations, c => Assert.Equal(2 * Fsr, c.BuiltAtFsrHz));
        // the axes as built stay at the stated FSR: a later FSR decision converts these, once
        Assert.Same(fromRepeats, cavity.Built[0]);
        Assert.Same(fromCalibration, cavity.Built[1]);
        var settled = new SettledInstruments(cavity.Instruments, cavity.Calibrations, []) { Built = cavity.Built };
        var decided = InstrumentSettlement.WithDecidedFsr(settled, Refinement(new InstrumentScale("cav", 2 * Fsr, 2.01 * Fsr, 1e5, 0.005, "known interval")));
        Assert.All(decided.Calibrations, c => Assert.Equal(2.01 * Fsr, c.Axis.Derivative(0.5), 1e-3));
    }

    [Fact]
    public void A_reference_laser_at_another_wavelength_repeats_at_one_FSR_of_the_cavity()
    {
        // the reference's peaks repeat every FSR·λ_cal/λ_source on the source's axis (780 nm for 1064 nm): the period its
        // pattern decided is one FSR of the cavity, which stays as stated
        const double ratio = 780.0 / 1064.0;
        var axis = Axis("cav") with { BuiltAtFsrHz = Fsr, PeriodDecision = Decision(ratio * Fsr, ratio * Fsr) };
        Assert.Equal(Fsr, axis.DecidedFsrHz);
        var cavity = CalibrationSteps.SettleCavityProperties(new Dictionary<string, Instrument> { ["cav"] = new Instrument("cav", Fsr, 600) }, [axis]);
        Assert.Equal(Fsr, cavity.Instruments["cav"].FsrHz);
        Assert.Same(axis, cavity.Calibrations[0]);
    }

    [Fact]
    public void Cavity_properties_are_returned_without_touching_the_axes_handed_in()
    {
        var axes = new List<AxisCalibration> { Axis("cav") };
        var instruments = new Dictionary<string, Instrument> { ["cav"] = new Instrument("cav", Fsr, 600) };
        var cavity = CalibrationSteps.SettleCavityProperties(instruments, axes);
        Assert.False(cavity.Instruments["cav"].FinesseMeasured);
        Assert.Contains(cavity.Warnings, w => w.Contains("the finesse could not be measured", StringComparison.Ordinal));
        Assert.Equal(600, instruments["cav"].Finesse);
        Assert.Single(axes);
        Assert.Same(axes[0], cavity.Calibrations[0]);
    }
}
