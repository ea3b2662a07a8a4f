using System.Text.Json;
using OrderUnfold.Calibration;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline;

/// <summary>
/// Reads a saved calibration file (<see cref="CalibrationFile"/>) as user input: the input limits first (a regular
/// file within <c>--max-file-size</c>; Io/InputLimits.cs), and any damage the JSON reader does not turn into an
/// <see cref="InputException"/> itself (a key given twice, a value of the wrong kind) becomes one naming the file, as does a
/// refusal raised without a file (a saved instrument whose FSR is not positive).
/// </summary>
public static class SavedCalibration
{
    public static CalibrationSet Read(string path)
    {
        InputLimits.CheckFile(path, "calibration file");
        try
        {
            return CalibrationFile.Read(path);
        }
        catch (InputException e) when (e.File is null)
        {
            throw e.At(path); // a value the instruments refuse (an FSR of 0 Hz, say): name the file it came from
        }
        catch (Exception e) when (e is ArgumentException or InvalidOperationException or FormatException or JsonException or KeyNotFoundException
                                      or OverflowException)
        {
            throw new InputException($"not a readable calibration file ({e.GetType().Name}: {InputLimits.Clip(e.Message, 120)}); write it again with the calibrate command", path, inner: e);
        }
    }
}
