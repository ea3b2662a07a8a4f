using System.Globalization;
using System.Text.Json;
using System.Text.Json.Nodes;
using OrderUnfold.Instruments;
using OrderUnfold.Io;

namespace OrderUnfold.Calibration;

/// <summary>
/// The JSON report of a calibration: per axis how it was found (calibration sweep, repeats of the source, both),
/// how well it fits (residual RMS in Hz and in linewidths, axis uncertainty, pairs used and rejected), the fitted
/// finesse with its uncertainty and peak shape, transverse-mode families, and the FSR refinement when it ran.
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
    public static JsonObject Build(CalibrationSet set, IReadOnlyList<Instrument> stated, IReadOnlyList<string> warnings, FsrRefinement? fsr, string? toolVersion = null)
    {
        var statedByName = stated.ToDictionary(i => i.Name);
        var byName = set.Instruments.ToDictionary(i => i.Name);
        return new JsonObject
        {
            ["tool"] = "orderunfold",
            ["version"] = toolVersion ?? typeof(CalibrationReport).Assembly.GetName().Version?.ToString(3),
            ["created_utc"] = DateTime.UtcNow.ToString("yyyy-MM-ddTHH:mm:ssZ", CultureInfo.InvariantCulture),
            ["source"] = set.Source,
            ["instruments"] = new JsonArray(set.Instruments.Select(i =>
            {
                statedByName.TryGetValue(i.Name, out var s);
                return (JsonNode)new JsonObject
                {
                    ["name"] = i.Name,
                    ["geometry"] = i.Geometry.ToString().ToLowerInvariant(),
                    ["fsr_hz"] = N(i.FsrHz),
                    ["stated_fsr_hz"] = N(s?.FsrHz),
                    ["finesse"] = N(i.Finesse),
                    ["stated_finesse"] = N(s?.Finesse),
                    ["linewidth_hz"] = N(i.LinewidthHz),
                };
            }).ToArray()),
            ["axes"] = new JsonArray(set.Axes.Select(a => (JsonNode)Axis(a, byName.GetValueOrDefault(a.Instrument))).ToArray()),
            ["fsr_refinement"] = fsr is null ? null : Fsr(fsr),
            ["warnings"] = new JsonArray(warnings.Select(w => (JsonNode)JsonValue.Create(w)!).ToArray()),
        };
    }

    /// <summary>Writes the report atomically.</summary>
    public static void Write(string path, JsonObject report) =>
        AtomicFile.WriteAllText(path, report.ToJsonString(new JsonSerializerOptions { WriteIndented = true }) + "\n");

    private static JsonObject Axis(AxisCalibration a, Instrument? inst)
    {
        var lw = inst?.LinewidthHz;
        var f = a.FinesseDetail;
        var t = a.TransverseModes;
        return new JsonObject
        {
            ["instrument"] = a.Instrument,
            ["direction"] = a.Direction.ToString().ToLowerInvariant(),
            ["source"] = a.Source,
            ["method"] = a.Method,
            ["from_repeats"] = a.FromRepeats,
            ["degree"] = a.Axis.Degree,
            ["points"] = a.PointCount,
            ["pairs_used"] = a.FromRepeats ? a.PairsUsed : null,
            ["pairs_rejected"] = a.FromRepeats ? a.PairsRejected : null,
            ["residual_rms_hz"] = N(a.ResidualRmsHz),
            ["residual_rms_linewidths"] = lw is double l ? N(a.ResidualRmsHz / l) : null,
            ["max_residual_hz"] = N(a.ResidualHz.Select(Math.Abs).DefaultIfEmpty(double.NaN).Max()),
            ["axis_sigma_hz"] = N(a.AxisSigmaHz),
            ["x_min"] = N(a.Axis.XMin),
            ["x_max"] = N(a.Axis.XMax),
            ["finesse"] = N(a.Finesse),
            ["finesse_sigma"] = N(a.FinesseSigma),
            ["finesse_fit"] = f is null ? null : new JsonObject
            {
                ["weighted_mean"] = N(f.Finesse),
                ["sigma"] = N(f.Sigma),
                ["peaks"] = f.Peaks.Count,
                ["scatter_chi2"] = N(f.ScatterChiSquare),
                ["consistent"] = f.Consistent,
                ["profile_airy_shaped"] = f.Profile?.AiryShaped,
                ["profile_rms_deviation"] = N(f.Profile?.RmsDeviation),
                ["profile_odd_rms"] = N(f.Profile?.OddRms),
                ["profile_noise_rms"] = N(f.Profile?.NoiseRms),
                ["profile_detuning_fwhm"] = f.Profile is null ? null : new JsonArray(f.Profile.DetuningFwhm.Select(v => N(v)).ToArray()),
                ["profile_measured"] = f.Profile is null ? null : new JsonArray(f.Profile.Measured.Select(v => N(v)).ToArray()),
            },
            ["period_decision"] = PeriodDecisionNode(a.PeriodDecision),
            ["transverse_modes"] = t is null ? null : new JsonObject
            {
                ["main_peaks"] = t.MainPeaks,
                ["alternation_ratio"] = N(t.AlternationRatio),
                ["families"] = new JsonArray(t.Families.Select(fam => (JsonNode)new JsonObject
                {
                    ["offset_fsr"] = N(fam.OffsetFsr),
                    ["relative_height"] = N(fam.RelativeHeight),
                    ["count"] = fam.Count,
                    ["periods"] = fam.Periods,
                    ["half_period"] = fam.HalfPeriod,
                }).ToArray()),
            },
            ["coefficients_hz"] = new JsonArray(a.Axis.Coefficients.Select(v => N(v)).ToArray()),
            ["center"] = N(a.Axis.Center),
            ["half_range"] = N(a.Axis.HalfRange),
            ["warnings"] = new JsonArray(a.Warnings.Select(w => (JsonNode)JsonValue.Create(w)!).ToArray()),
        };
    }

    internal static JsonObject Fsr(FsrRefinement r) => new()
    {
        ["rounds"] = r.Rounds,
        ["reduced_chi_square_before"] = N(r.ReducedChiSquareBefore),
        ["reduced_chi_square_after"] = N(r.ReducedChiSquareAfter),
        ["max_line_shift_hz"] = N(r.MaxLineShiftHz),
        ["instruments"] = new JsonArray(r.Instruments.Select(s => (JsonNode)new JsonObject
        {
            ["instrument"] = s.Instrument,
            ["nominal_fsr_hz"] = N(s.NominalFsrHz),
            ["refined_fsr_hz"] = N(s.RefinedFsrHz),
            ["sigma_hz"] = N(s.SigmaHz),
            ["relative_change"] = N(s.RelativeChange),
            ["basis"] = s.Basis,
        }).ToArray()),
        ["known_intervals"] = new JsonArray(r.Intervals.Select(i => (JsonNode)new JsonObject
        {
            ["lower_hz"] = N(i.LowerHz),
            ["upper_hz"] = N(i.UpperHz),
            ["multiple"] = i.Multiple,
            ["stated_hz"] = N(i.StatedHz),
            ["measured_hz"] = N(i.MeasuredHz),
            ["sigma_hz"] = N(i.SigmaHz),
        }).ToArray()),
        ["line_shifts"] = new JsonArray(r.LineShifts.Select(s => (JsonNode)new JsonObject
        {
            ["before_hz"] = N(s.BeforeHz),
            ["after_hz"] = N(s.AfterHz),
        }).ToArray()),
        ["notes"] = new JsonArray(r.Notes.Select(n => (JsonNode)JsonValue.Create(n)!).ToArray()),
    };

    private static JsonNode? N(double? v) => v is double d && double.IsFinite(d) ? JsonValue.Create(d) : null;

    /// <summary>The period decision as JSON (candidates and scores, basis, families); null when none was made.</summary>
    public static JsonNode? PeriodDecisionNode(PeriodDecision? d) => d is null ? null : new JsonObject
    {
        ["period_scan_units"] = Num(d.PeriodScan),
        ["period_hz"] = Num(d.PeriodHz),
        ["stated_fsr_hz"] = Num(d.StatedFsrHz),
        ["basis"] = d.Basis,
        ["fundamental"] = d.Fundamental,
        ["candidates"] = new JsonArray(d.Candidates.Select(c => (JsonNode)new JsonObject
        {
            ["label"] = c.Label,
            ["period_scan_units"] = Num(c.PeriodScan),
            ["explained"] = Num(c.Explained),
            ["predicted_repeats"] = c.Predictions,
            ["height_agreement"] = Num(c.HeightAgreement),
            ["groups"] = c.Groups,
            ["consistent"] = c.Consistent,
            ["chosen"] = c.Chosen,
        }).ToArray()),
        ["families"] = FamiliesNode(d.Families),
    };

    /// <summary>Transverse families as JSON: index, Gouy offset and apparent offset (fractions of the FSR), relative height, basis.</summary>
    public static JsonArray FamiliesNode(IEnumerable<CavityModeFamily> families) => new(families.Select(f => (JsonNode)new JsonObject
    {
        ["n"] = f.N,
        ["gouy_offset_fsr"] = Num(f.GouyOffsetFsr),
        ["apparent_offset_fsr"] = Num(f.ApparentOffsetFsr),
        ["relative_height"] = Num(f.RelativeHeight),
        ["basis"] = f.Basis,
    }).ToArray());

    private static JsonNode? Num(double v) => double.IsFinite(v) ? JsonValue.Create(v) : null;
}
