using OrderUnfold.Io;
using OrderUnfold.Outputs;

namespace OrderUnfold.Calibration;

/// <summary>
/// The JSON report of a calibration (calibration-report.json, <see cref="CalibrationReportRecord"/>): per axis how it was
/// found (calibration sweep, repeats of the source, both), how well it fits (residual RMS in Hz and in linewidths, axis
/// uncertainty, pairs used and rejected), the fitted finesse with its uncertainty and peak shape, transverse-mode
/// families, and the FSR refinement when it ran.
/// </summary>
public static class CalibrationReport
{
    /// <summary>File name the <c>calibrate</c> command gives the report.</summary>
    public const string FileName = "calibration-report.json";

    /// <summary>File name the <c>calibrate</c> command gives the reusable calibration.</summary>
    public const string CalibrationFileName = "calibration.json";

    /// <summary>Builds the report.</summary>
    /// <param name="set">The calibration (instruments as calibrated, axes).</param>
    /// <param name="stated">Instruments as the setup states them (to show what changed).</param>
    /// <param name="warnings">Warnings of the calibration run.</param>
    /// <param name="fsr">FSR refinement, when it ran.</param>
    /// <param name="toolVersion">Version text of the tool.</param>
    public static CalibrationReportRecord Build(CalibrationSet set, IReadOnlyList<Instrument> stated, IReadOnlyList<string> warnings, FsrRefinement? fsr, string? toolVersion = null) =>
        CalibrationRecords.Report(set, stated, warnings, fsr, toolVersion);

    /// <summary>Writes the report atomically.</summary>
    public static void Write(string path, CalibrationReportRecord report) =>
        AtomicFile.WriteAllText(path, OutputJson.Serialize(report, c => c.CalibrationReportRecord));
}
