namespace OrderUnfold.Tests.FieldTraces;

/// <summary>
/// Setups for the field traces written only from what shared/field-traces/README.md says a user knows (stated FSR,
/// finesse guess, geometry, columns). <c>file</c> maps a data file's name to the path written into the setup: the name
/// itself when the files are copied beside the setup, an absolute path when they are read in place.
/// </summary>
internal static class FieldTraceSetups
{
    /// <summary>README 02 and 03: the same handheld 8-bit scope (600 points at 4 µs, no ramp channel) and 2 GHz confocal
    /// interferometer, finesse about 30.</summary>
    public static string ShortScope(Func<string, string> file) => $"""
        [[instrument]]
        name = "sfpi"
        geometry = "confocal"
        fsr = "2 GHz"
        finesse = 30
        [[sweep]]
        instrument = "sfpi"
        file = "{file("scope_ch1.csv")}"
        y_column = 2
        sample_interval = "4 us"
        """;

    /// <summary>README 04: datasheet FSR 2.0 GHz (truly 2.2 GHz), finesse about 25, 1000 noisy 8-bit points after a preamble.</summary>
    public static string OpenLaser(Func<string, string> file) => $"""
        [[instrument]]
        name = "sfpi"
        geometry = "confocal"
        fsr = "2 GHz"
        finesse = 25
        [[sweep]]
        instrument = "sfpi"
        file = "{file("open_laser.csv")}"
        x_column = "TIME"
        y_column = "CH1"
        """;

    /// <summary>README 06: plane etalon, FSR 64 GHz, finesse about 8, stepped by a DAC (dac_code, detector_V).</summary>
    public static string PlaneEtalon(Func<string, string> file) => $"""
        [[instrument]]
        name = "etalon"
        geometry = "planar"
        fsr = "64 GHz"
        finesse = 8
        [[sweep]]
        instrument = "etalon"
        file = "{file("stepscan.csv")}"
        x_column = "dac_code"
        y_column = "detector_V"
        scan = "ramp"
        """;

    /// <summary>README 07: two confocal interferometers, calibrated FSR 1.500 and 1.620 GHz, finesse about 200 and 220; a
    /// calibration sweep and a measurement per cavity; Time;CH1;CH2 with CH2 the ramp monitor.</summary>
    public static string TwoCavities(Func<string, string> file) => $"""
        [[instrument]]
        name = "cavA"
        fsr = "1.5 GHz"
        finesse = 200
        [[instrument]]
        name = "cavB"
        fsr = "1.62 GHz"
        finesse = 220
        {RampSweep("sweep", "cavA", file("cavA_meas.csv"))}
        {RampSweep("sweep", "cavB", file("cavB_meas.csv"))}
        {RampSweep("calibration", "cavA", file("cavA_cal.csv"))}
        {RampSweep("calibration", "cavB", file("cavB_cal.csv"))}
        """;

    /// <summary>README 08: two planar cavities, calibrated FSR 10.0 and 7.3 GHz, finesse about 150 and 160; time axis only.</summary>
    public static string DiodeComb(Func<string, string> file) => $"""
        [[instrument]]
        name = "cav10"
        fsr = "10 GHz"
        finesse = 150
        [[instrument]]
        name = "cav7p3"
        fsr = "7.3 GHz"
        finesse = 160
        [[sweep]]
        instrument = "cav10"
        file = "{file("cav10_meas.csv")}"
        [[sweep]]
        instrument = "cav7p3"
        file = "{file("cav7p3_meas.csv")}"
        [[calibration]]
        instrument = "cav10"
        file = "{file("cav10_cal.csv")}"
        [[calibration]]
        instrument = "cav7p3"
        file = "{file("cav7p3_cal.csv")}"
        """;

    private static string RampSweep(string table, string instrument, string path) =>
        $"[[{table}]]\ninstrument = \"{instrument}\"\nfile = \"{path}\"\nx_column = 3\ny_column = 2\nscan = \"ramp\"";
}
