using System.Text.Json;
using System.Text.Json.Nodes;
using OrderUnfold.Instruments;
using OrderUnfold.Io;

namespace OrderUnfold.Calibration;

/// <summary>A set of sweep axes and instrument parameters that can be saved and reused for later sweeps.</summary>
/// <param name="Instruments">Instruments as calibrated (FSR, finesse).</param>
/// <param name="Axes">Axis per instrument and ramp direction.</param>
/// <param name="Source">Where it came from (setup path or description).</param>
public sealed record CalibrationSet(IReadOnlyList<Instrument> Instruments, IReadOnlyList<AxisCalibration> Axes, string Source);

/// <summary>
/// Reads and writes calibration files (JSON, format "orderunfold-calibration", version 1): the instruments and
/// every axis polynomial with its fit quality, so archived sweeps of one session share one calibration.
/// </summary>
public static class CalibrationFile
{
    public const string Format = "orderunfold-calibration";
    public const int Version = 1;

    public static string ToJson(CalibrationSet set)
    {
        var o = new JsonObject
        {
            ["format"] = Format,
            ["version"] = Version,
            ["source"] = set.Source,
            ["instruments"] = new JsonArray(set.Instruments.Select(i => (JsonNode)new JsonObject
            {
                ["name"] = i.Name,
                ["geometry"] = i.Geometry.ToString().ToLowerInvariant(),
                ["fsr_hz"] = i.FsrHz,
                ["finesse"] = i.Finesse,
                ["length_m"] = i.LengthM,
                ["refractive_index"] = i.RefractiveIndex,
                ["finesse_measured"] = i.FinesseMeasured,
                ["transverse_families"] = CalibrationReport.FamiliesNode(i.Families),
            }).ToArray()),
            ["axes"] = new JsonArray(set.Axes.Select(a => (JsonNode)new JsonObject
            {
                ["instrument"] = a.Instrument,
                ["direction"] = a.Direction.ToString().ToLowerInvariant(),
                ["method"] = a.Method,
                ["source"] = a.Source,
                ["coefficients_hz"] = new JsonArray(a.Axis.Coefficients.Select(c => (JsonNode)JsonValue.Create(c)).ToArray()),
                ["center"] = a.Axis.Center,
                ["half_range"] = a.Axis.HalfRange,
                ["x_min"] = a.Axis.XMin,
                ["x_max"] = a.Axis.XMax,
                ["residual_rms_hz"] = Finite(a.ResidualRmsHz),
                ["shape_covariance_hz2"] = a.ShapeCovariance is { } cov ? new JsonArray(cov.Select(c => (JsonNode)JsonValue.Create(c)).ToArray()) : null,
                ["points"] = a.PointCount,
                ["finesse"] = Finite(a.Finesse),
                ["finesse_sigma"] = Finite(a.FinesseSigma),
                ["period_decision"] = CalibrationReport.PeriodDecisionNode(a.PeriodDecision),
            }).ToArray()),
        };
        return o.ToJsonString(new JsonSerializerOptions { WriteIndented = true }) + "\n";
    }

    public static void Write(string path, CalibrationSet set) => AtomicFile.WriteAllText(path, ToJson(set));

    /// <summary>Reads a calibration file; InputException (with the file) when it is not one or is damaged.</summary>
    public static CalibrationSet Read(string path)
    {
        if (!File.Exists(path)) throw new InputException($"calibration file not found: {Path.GetFullPath(path)}", path);
        JsonNode? root;
        try
        {
            root = JsonNode.Parse(File.ReadAllText(path));
        }
        catch (JsonException e)
        {
            throw new InputException($"not valid JSON: {e.Message}", path, (int?)(e.LineNumber + 1), (int?)(e.BytePositionInLine + 1));
        }

        if (root is not JsonObject o || (string?)o["format"] != Format)
            throw new InputException($"not an OrderUnfold calibration file (expected \"format\": \"{Format}\")", path);
        if ((int?)o["version"] is not int v || v != Version)
            throw new InputException($"calibration file version {o["version"]} is not supported (this build reads version {Version})", path);
        try
        {
            var instruments = o["instruments"]!.AsArray().Select(n => new Instrument(
                (string)n!["name"]!,
                (double)n["fsr_hz"]!,
                (double)n["finesse"]!,
                Enum.Parse<CavityGeometry>((string)n["geometry"]!, ignoreCase: true),
                (double?)n["length_m"],
                (double?)n["refractive_index"] ?? 1.0)
            {
                FinesseMeasured = (bool?)n["finesse_measured"] ?? true,
                Families = n["transverse_families"]?.AsArray().Select(f => new CavityModeFamily((int)f!["n"]!, (double)f["gouy_offset_fsr"]!,
                    (double)f["relative_height"]!, ((string?)f["basis"] ?? "measured") + " (reused)")).ToList() ?? [],
            }).ToList();
            var axes = o["axes"]!.AsArray().Select(n =>
            {
                var poly = new AxisPolynomial(n!["coefficients_hz"]!.AsArray().Select(c => (double)c!).ToArray(),
                    (double)n["center"]!, (double)n["half_range"]!, (double)n["x_min"]!, (double)n["x_max"]!);
                var cov = n["shape_covariance_hz2"]?.AsArray().Select(c => (double)c!).ToArray();
                if (cov is not null && cov.Length != poly.Degree * poly.Degree)
                    throw new FormatException($"shape_covariance_hz2 has {cov.Length} values; a degree-{poly.Degree} axis needs {poly.Degree * poly.Degree}");
                return new AxisCalibration((string)n["instrument"]!, Enum.Parse<RampDirection>((string)n["direction"]!, ignoreCase: true),
                    (string?)n["source"] ?? path, ((string?)n["method"] ?? "calibration file") + " (reused)", poly, [], [], [],
                    (double?)n["residual_rms_hz"] ?? double.NaN, (double?)n["finesse"], (double?)n["finesse_sigma"], [])
                {
                    ShapeCovariance = cov,
                };
            }).ToList();
            return new CalibrationSet(instruments, axes, path);
        }
        catch (Exception e) when (e is NullReferenceException or InvalidOperationException or FormatException or ArgumentException or InputException)
        {
            throw new InputException($"damaged calibration file: {e.Message}", path);
        }
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

    private static double? Finite(double? v) => v is double d && double.IsFinite(d) ? d : null;
}
