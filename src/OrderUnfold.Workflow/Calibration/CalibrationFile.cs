using OrderUnfold.Io;
using OrderUnfold.Outputs;

namespace OrderUnfold.Calibration;

/// <summary>A set of sweep axes and instrument parameters that can be saved and reused for later sweeps.</summary>
/// <param name="Instruments">Instruments as calibrated (FSR, finesse).</param>
/// <param name="Axes">Axis per instrument and ramp direction.</param>
/// <param name="Source">Where it came from (setup path or description).</param>
public sealed record CalibrationSet(IReadOnlyList<Instrument> Instruments, IReadOnlyList<AxisCalibration> Axes, string Source);

/// <summary>
/// Reads and writes calibration files (calibration.json: <see cref="CalibrationFileRecord"/>, format
/// "orderunfold-calibration", schema version 2; version 1 files are still read): the instruments and every axis polynomial
/// with its fit quality, so archived sweeps of one session share one calibration.
/// </summary>
public static class CalibrationFile
{
    public const string Format = CalibrationFileRecord.FormatName;
    public const int Version = CalibrationFileRecord.CurrentSchemaVersion;

    public static string ToJson(CalibrationSet set) => OutputJson.Serialize(CalibrationRecords.Saved(set), c => c.CalibrationFileRecord);

    public static void Write(string path, CalibrationSet set) => AtomicFile.WriteAllText(path, ToJson(set));

    /// <summary>Reads a calibration file; InputException (with the file, and the line and column where the parser stopped)
    /// when it is not one or is damaged.</summary>
    public static CalibrationSet Read(string path)
    {
        if (!File.Exists(path)) throw new InputException($"calibration file not found: {Path.GetFullPath(path)}", path);
        var record = OutputJson.Deserialize(path, File.ReadAllBytes(path), c => c.CalibrationFileRecord, "calibration file");
        return CalibrationRecords.ToSet(record, path);
    }

    /// <summary>Checks that a calibration fits a setup's instruments (same names, FSR within 1 %).</summary>
    public static void CheckAgainst(CalibrationSet set, IReadOnlyList<InstrumentSpec> instruments, string path)
    {
        foreach (var spec in instruments)
        {
            var cal = set.Instruments.FirstOrDefault(i => i.Name == spec.Name)
                      ?? throw new InputException($"the calibration has no instrument '{spec.Name}' (it has: {string.Join(", ", set.Instruments.Select(i => i.Name))}); it was made for another setup", path);
            var stated = spec.ToInstrument().FsrHz;
            // a stated confocal FSR (c/4L) that the data showed to be c/2L (a resolved odd family) is the same instrument
            var doubled = spec.Geometry == CavityGeometry.Confocal && Math.Abs(cal.FsrHz / stated - 2) < 0.02 && cal.Families.Any(f => f.N == 1);
            if (Math.Abs(cal.FsrHz / stated - 1) > 0.01 && !doubled)
                throw new InputException($"the calibration's instrument '{spec.Name}' has FSR {Units.Quantity.FormatFrequency(cal.FsrHz)}, the setup states {Units.Quantity.FormatFrequency(stated)}: the calibration was made for another instrument", path);
        }
    }

}
