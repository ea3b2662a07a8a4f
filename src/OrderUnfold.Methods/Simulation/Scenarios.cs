using System.Globalization;
using System.Text;
using OrderUnfold.Instruments;

namespace OrderUnfold.Simulation;

/// <summary>Built-in simulated scenarios (invented for the demo, the tests and the docs).</summary>
public static class Scenarios
{
    /// <summary>Names of the built-in scenarios.</summary>
    public static IReadOnlyList<string> Names { get; } = ["demo", "caesium", "single"];

    /// <summary>
    /// The demo: a dual-wavelength fibre laser under test (invented scenario, simulated data) emits two main lines
    /// 8.45 GHz apart, each with weaker satellites, plus a faint stray line below the first. Two planar cavities of
    /// 100.0 mm and 93.7 mm (FSR ≈ 1.499 and 1.600 GHz, finesse 150) are swept by a triangle ramp with a
    /// non-linear, hysteretic piezo; each has a calibration-laser sweep.
    /// </summary>
    public static SimulationSpec Demo() => new()
    {
        Label = "SIMULATED DATA: OrderUnfold demo (dual-wavelength fibre laser, invented scenario)",
        Lines =
        [
            new SimulatedLine(-2.87e9, 0.08),
            new SimulatedLine(0, 1.0),
            new SimulatedLine(0.377e9, 0.22),
            new SimulatedLine(7.934e9, 0.26),
            new SimulatedLine(8.45e9, 0.72),
            new SimulatedLine(9.365e9, 0.15),
        ],
        Cavities =
        [
            new SimulatedCavity { Instrument = Instrument.FromLength("A", 0.1000, CavityGeometry.Planar, 150), SpanFsr = 5, Samples = 12000, Gain = 0.85, Quadratic = 0.05, Cubic = 0.02, Hysteresis = 0.03 },
            new SimulatedCavity { Instrument = Instrument.FromLength("B", 0.0937, CavityGeometry.Planar, 150), SpanFsr = 5, Samples = 12000, Gain = 1.1, Quadratic = 0.045, Cubic = -0.015, Hysteresis = 0.025, DetectorOffset = 0.035 },
        ],
        NoiseFraction = 0.004,
        Bits = 8,
        Seed = 20261202,
    };

    /// <summary>Two line groups one caesium hyperfine splitting (9 192 631 770 Hz, exact by the SI definition of the second) apart.</summary>
    public static SimulationSpec Caesium()
    {
        const double cs = 9_192_631_770;
        return Demo() with
        {
            Label = "SIMULATED DATA: two line groups 9 192 631 770 Hz apart",
            Lines = [new SimulatedLine(0, 1.0), new SimulatedLine(151e6, 0.55), new SimulatedLine(cs, 0.8), new SimulatedLine(cs + 237e6, 0.45), new SimulatedLine(cs - 263e6, 0.3)],
            Seed = 7,
        };
    }

    /// <summary>One cavity only: the spectrum can only be given folded into one FSR.</summary>
    public static SimulationSpec Single() => Demo() with
    {
        Label = "SIMULATED DATA: one cavity only",
        Cavities = [Demo().Cavities[0]],
        Lines = [new SimulatedLine(0, 1.0), new SimulatedLine(0.377e9, 0.22), new SimulatedLine(0.81e9, 0.4)],
        Seed = 11,
    };

    /// <summary>The scenario called <paramref name="name"/> (case-insensitive); unknown names are bad input.</summary>
    public static SimulationSpec ByName(string name) => name.ToLowerInvariant() switch
    {
        "demo" => Demo(),
        "caesium" or "cesium" => Caesium(),
        "single" => Single(),
        _ => throw new InputException($"unknown scenario '{name}'; known: {string.Join(", ", Names)}"),
    };
}
