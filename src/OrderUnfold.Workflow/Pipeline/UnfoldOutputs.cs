using System.Globalization;
using System.Text;
using System.Text.Json;
using System.Text.Json.Nodes;
using OrderUnfold.Calibration;
using OrderUnfold.Inversion;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline;

/// <summary>Names of the files an unfold writes.</summary>
public static class OutputNames
{
    public const string Report = "report.json";
    public const string Lines = "lines.csv";
    public const string Spectrum = "spectrum.csv";
    public const string SpectrumPlot = "spectrum.png";
}

/// <summary>Writes an unfold run's report, tables and plots. Every file is written atomically.</summary>
public static class UnfoldOutputs
{
    private static readonly CultureInfo C = CultureInfo.InvariantCulture;

    /// <summary>Writes report.json, lines.csv, spectrum.csv and (when <paramref name="figures"/> is given) the PNGs.
    /// Returns the paths written. With <paramref name="staged"/> the directory is a staging folder that is published as a
    /// whole (the batch): the text files are written directly, and flushing them to disk is left to the publisher.</summary>
    public static IReadOnlyList<string> Write(UnfoldRun run, string directory, IFigureWriter? figures, string? toolVersion = null, bool staged = false)
    {
        Directory.CreateDirectory(directory);
        var written = new List<string>();
        void Text(string name, string content)
        {
            var p = Path.Combine(directory, name);
            AtomicFile.WriteAllText(p, content, staged);
            written.Add(p);
        }

        Text(OutputNames.Lines, LinesCsv(run));
        Text(OutputNames.Spectrum, SpectrumCsv(run));
        if (figures is not null) written.AddRange(figures.WriteUnfold(run, directory));

        // the report last: its presence means the run's outputs are complete
        Text(OutputNames.Report, Report(run, toolVersion).ToJsonString(new JsonSerializerOptions { WriteIndented = true }) + "\n");
        return written;
    }

    /// <summary>lines.csv: one row per line, frequencies relative to the anchor (strongest line).</summary>
    public static string LinesCsv(UnfoldRun run)
    {
        var anchor = run.Setup.Solve.AnchorFrequencyHz;
        var widths = run.Result.Lines.Any(l => l.WidthHz is not null);
        var sb = new StringBuilder();
        sb.Append("frequency_hz,frequency_sigma_hz,frequency_crb_hz,frequency_axis_sigma_hz,intensity,intensity_sigma,snr");
        if (widths) sb.Append(",fwhm_hz,fwhm_sigma_hz");
        sb.Append(",order,alias_shift_hz,alias_delta_chi2");
        if (anchor is not null) sb.Append(",absolute_frequency_hz");
        sb.Append('\n');
        foreach (var l in run.Result.Lines)
        {
            sb.Append(F(l.FrequencyHz)).Append(',')
              .Append(F(l.FrequencySigmaHz)).Append(',')
              .Append(F(l.FrequencyCrbHz)).Append(',')
              .Append(F(l.FrequencyAxisSigmaHz)).Append(',')
              .Append(F(l.Intensity)).Append(',')
              .Append(F(l.IntensityError)).Append(',')
              .Append(F(l.Snr));
            if (widths) sb.Append(',').Append(F(l.WidthHz)).Append(',').Append(F(l.WidthSigmaHz));
            sb.Append(',').Append(Verdict(run, l)).Append(',').Append(F(l.AliasShiftHz)).Append(',').Append(F(l.AliasDeltaChiSquare));
            if (anchor is double a) sb.Append(',').Append(F(a + l.FrequencyHz));
            sb.Append('\n');
        }

        return sb.ToString();
    }

    /// <summary>
    /// The unambiguous range in one wording for the console and the plots: the window's alias-free width from the
    /// instruments' geometry (what the summary prints), and, when the refinement tested it, how far the weakest
    /// line's order is pinned at this noise (a different quantity, so it is named as such).
    /// </summary>
    public static string UnambiguousText(UnfoldRun run)
    {
        var r = run.Result;
        if (!r.OrdersResolved) return "one instrument: the spectrum is folded into one FSR; orders are unknown";
        var text = $"unambiguous range {Units.Quantity.FormatFrequency(r.UnambiguousRangeHz)} (alias margin ≥ 3 linewidths; window {Units.Quantity.FormatFrequency(r.Grid.StartHz)} to {Units.Quantity.FormatFrequency(r.Grid.EndHz)})";
        if (run.Refinement?.UnambiguousRangeHz is double noise)
            text += run.Refinement.UnambiguousRangeIsLowerBound
                ? $"; at this noise no order shift of the weakest line up to ±{Units.Quantity.FormatFrequency(noise)} fits"
                : $"; at this noise the weakest line's order is pinned against shifts up to ±{Units.Quantity.FormatFrequency(noise)}";
        return text;
    }

    /// <summary>"secure", "doubtful", "unknown" (one instrument) or "unchecked" (no refinement).</summary>
    public static string Verdict(UnfoldRun run, UnfoldedLine l) =>
        !run.Result.OrdersResolved ? "unknown" : !run.Result.Refined ? "unchecked" : l.Doubtful ? "doubtful" : "secure";

    /// <summary>spectrum.csv: the grid and the recovered intensity per bin.</summary>
    public static string SpectrumCsv(UnfoldRun run)
    {
        var limit = run.Result.DetectionLimit;
        var sb = new StringBuilder(limit is null ? "frequency_hz,intensity\n" : "frequency_hz,intensity,detection_limit\n");
        var g = run.Result.Grid;
        for (var j = 0; j < g.Count; j++)
        {
            sb.Append(F(g[j])).Append(',').Append(F(run.Result.Spectrum[j]));
            if (limit is not null) sb.Append(',').Append(F(limit[j]));
            sb.Append('\n');
        }
        return sb.ToString();
    }

    public static JsonObject Report(UnfoldRun run, string? toolVersion = null)
    {
        var r = run.Result;
        var anchor = run.Setup.Solve.AnchorFrequencyHz;
        var o = new JsonObject
        {
            ["tool"] = "orderunfold",
            ["version"] = toolVersion ?? typeof(UnfoldOutputs).Assembly.GetName().Version?.ToString(3),
            ["created_utc"] = DateTime.UtcNow.ToString("yyyy-MM-ddTHH:mm:ssZ", C),
            ["frequencies"] = anchor is null ? "relative to the anchor (strongest) line, Hz" : "relative to the anchor line, Hz; absolute_frequency_hz adds the stated anchor frequency",
            ["inputs"] = new JsonArray(run.Inputs.Select(i => (JsonNode)new JsonObject
            {
                ["role"] = i.Role, ["path"] = i.Path, ["bytes"] = i.Bytes, ["sha256"] = i.Sha256,
            }).ToArray()),
            ["instruments"] = new JsonArray(run.Instruments.Select(i => (JsonNode)new JsonObject
            {
                ["name"] = i.Name,
                ["geometry"] = i.Geometry.ToString().ToLowerInvariant(),
                ["length_m"] = N(i.LengthM),
                ["refractive_index"] = i.RefractiveIndex,
                ["fsr_hz"] = N(i.FsrHz),
                ["finesse"] = N(i.Finesse),
                ["linewidth_hz"] = N(i.LinewidthHz),
                ["finesse_measured"] = i.FinesseMeasured,
                ["transverse_families"] = CalibrationReport.FamiliesNode(i.Families),
            }).ToArray()),
            ["calibrations"] = new JsonArray(run.Calibrations.Select(CalibrationNode).ToArray()),
            ["fsr_refinement"] = run.FsrRefinement is { } fr ? CalibrationReport.Fsr(fr) : null,
            ["solve"] = new JsonObject
            {
                ["grid_start_hz"] = N(r.Grid.StartHz),
                ["grid_step_hz"] = N(r.Grid.StepHz),
                ["grid_bins"] = r.Grid.Count,
                ["l1_weight"] = N(r.L1Weight),
                ["orders_resolved"] = r.OrdersResolved,
                ["unambiguous_range_hz"] = N(r.UnambiguousRangeHz),
                ["solver"] = r.Solver.Method == Inversion.NnlsMethod.Dense ? "dense" : "active-set",
                ["solver_reason"] = r.Solver.Reason,
                ["solver_status"] = r.Solver.Status.ToString().ToLowerInvariant(),
                ["solver_message"] = r.Solver.Message,
                ["solver_iterations"] = r.Solver.Iterations,
                ["solver_removals"] = r.Solver.Removals,
                ["kkt_violation"] = N(r.Solver.KktViolation),
                ["nonzero_bins"] = r.Solver.ActiveCount - run.Sweeps.Count,
            },
            ["reduced_chi_square"] = N(r.ReducedChiSquare),
            ["sweeps"] = new JsonArray(r.Sweeps.Select((s, k) => (JsonNode)new JsonObject
            {
                ["name"] = s.Name,
                ["instrument"] = s.Instrument,
                ["samples"] = s.Samples,
                ["offset_hz"] = N(s.OffsetHz),
                ["gain"] = N(s.Gain),
                ["background"] = N(s.Background),
                ["noise_sigma"] = N(s.NoiseSigma),
                ["noise"] = k < run.Sweeps.Count && run.Sweeps[k].Noise is { } ne ? new JsonObject
                {
                    ["sigma_dark"] = N(ne.SigmaBaseline),
                    ["quantisation_step"] = N(ne.QuantisationStep),
                    ["variance_slope"] = N(ne.VarianceSlope),
                    ["method"] = ne.Method,
                } : null,
                ["chi_square"] = N(s.ChiSquare),
                ["reduced_chi_square"] = N(s.ReducedChiSquare),
                ["residual_rms"] = N(s.ResidualRms),
            }).ToArray()),
            ["anchor_frequency_hz"] = N(anchor),
            ["detection_limit"] = N(ModeInputs.DetectionLimit(r)),
            ["orders_resolved"] = r.OrdersResolved,
            ["folding_fsr_hz"] = r.OrdersResolved ? null : N(run.Instruments[0].FsrHz),
            ["refinement"] = run.Refinement is { } rd ? new JsonObject
            {
                ["converged"] = rd.Converged,
                ["exit_reason"] = rd.ExitReason,
                ["iterations"] = rd.Iterations,
                ["chi_square"] = N(rd.ChiSquare),
                ["reduced_chi_square"] = N(rd.ReducedChiSquare),
                ["detection_threshold_delta_chi2"] = N(rd.DetectionThresholdDeltaChiSquare),
                ["clusters_dropped_as_insignificant"] = rd.Dropped,
                ["fell_back_to_grid"] = rd.FellBackToGrid,
                ["groups"] = rd.Groups,
                ["iterations_used"] = rd.IterationsUsed,
                ["iteration_budget"] = rd.IterationBudget,
                ["budget_exhausted"] = rd.BudgetExhausted,
                ["unambiguous_range_hz"] = N(rd.UnambiguousRangeHz),
                ["unambiguous_statement"] = rd.UnambiguousStatement,
                ["uncertainties"] = "standard errors from the fit covariance scaled by the reduced chi-square; frequency_crb_hz is the unscaled covariance (Cramér–Rao bound at the fit); frequency_sigma_hz includes the axis-calibration uncertainty, propagated from each axis fit's coefficient covariance, when it is known (its part: frequency_axis_sigma_hz); with a reduced chi-square below 1 (a pessimistic noise estimate) the scaled sigma lies below frequency_crb_hz by the factor sqrt(reduced chi-square)",
            } : null,
            ["unambiguous_range_statement"] = r.OrdersResolved
                ? $"lines closer than {Units.Quantity.FormatFrequency(r.UnambiguousRangeHz)} apart cannot be an exact alias of one another for these instruments (alias margin ≥ 3 linewidths); each line's alias_delta_chi2 says how securely its order is pinned at this noise level"
                : "one instrument: the spectrum is folded into one FSR; orders are unknown",
            ["lines"] = new JsonArray(r.Lines.Select(l => (JsonNode)new JsonObject
            {
                ["frequency_hz"] = N(l.FrequencyHz),
                ["frequency_sigma_hz"] = N(l.FrequencySigmaHz),
                ["frequency_crb_hz"] = N(l.FrequencyCrbHz),
                ["frequency_axis_sigma_hz"] = N(l.FrequencyAxisSigmaHz),
                ["frequency_bootstrap_sigma_hz"] = N(l.BootstrapSigmaHz),
                ["absolute_frequency_hz"] = anchor is double a ? N(a + l.FrequencyHz) : null,
                ["intensity"] = N(l.Intensity),
                ["intensity_sigma"] = N(l.IntensityError),
                ["snr"] = N(l.Snr),
                ["fwhm_hz"] = N(l.WidthHz),
                ["fwhm_sigma_hz"] = N(l.WidthSigmaHz),
                ["order"] = Verdict(run, l),
                ["alias_shift_hz"] = N(l.AliasShiftHz),
                ["alias_delta_chi2"] = N(l.AliasDeltaChiSquare),
                ["note"] = l.Note,
            }).ToArray()),
            ["offset_trials"] = new JsonArray(r.OffsetTrials.Select(t => (JsonNode)new JsonObject
            {
                ["sweep"] = t.Sweep, ["offset_hz"] = N(t.OffsetHz), ["chi_square"] = N(t.ChiSquare), ["chosen"] = t.Chosen,
            }).ToArray()),
            ["warnings"] = new JsonArray(run.AllWarnings.Select(w => (JsonNode)JsonValue.Create(w)!).ToArray()),
            ["notes"] = new JsonArray(run.Notes.Select(w => (JsonNode)JsonValue.Create(w)!).ToArray()),
            ["window_widening"] = run.Window is { } wf ? new JsonObject
            {
                ["reason"] = wf.Reason,
                ["first_window_hz"] = new JsonArray(N(wf.FirstStartHz), N(wf.FirstEndHz)),
                ["widened_half_width_hz"] = N(wf.HalfWidthHz),
                ["near_aliases"] = new JsonArray(wf.NearAliases.Select(a => (JsonNode)new JsonObject { ["shift_hz"] = N(a.DeltaHz), ["margin_linewidths"] = N(a.MarginLinewidths) }).ToArray()),
                ["source_wider_than_widened_window"] = wf.StillWider,
            } : null,
        };
        return o;
    }

    private static JsonNode CalibrationNode(AxisCalibration c) => new JsonObject
    {
        ["instrument"] = c.Instrument,
        ["direction"] = c.Direction.ToString().ToLowerInvariant(),
        ["source"] = c.Source,
        ["method"] = c.Method,
        ["degree"] = c.Axis.Degree,
        ["points"] = c.PointCount,
        ["residual_rms_hz"] = N(c.ResidualRmsHz),
        ["max_residual_hz"] = N(c.ResidualHz.Select(Math.Abs).DefaultIfEmpty(0).Max()),
        ["finesse"] = N(c.Finesse),
        ["finesse_sigma"] = N(c.FinesseSigma),
        ["axis_coefficients_hz"] = new JsonArray(c.Axis.Coefficients.Select(v => (JsonNode?)N(v)).ToArray()),
        ["axis_center"] = N(c.Axis.Center),
        ["axis_half_range"] = N(c.Axis.HalfRange),
        ["period_decision"] = CalibrationReport.PeriodDecisionNode(c.PeriodDecision),
        ["warnings"] = new JsonArray(c.Warnings.Select(w => (JsonNode)JsonValue.Create(w)!).ToArray()),
    };

    /// <summary>A finite number, or null (never NaN in a report).</summary>
    internal static JsonNode? N(double? v) => v is double d && double.IsFinite(d) ? JsonValue.Create(d) : null;

    /// <summary>Round-trip number text for CSV; empty for missing or non-finite values.</summary>
    internal static string F(double? v) => v is double d && double.IsFinite(d) ? d.ToString("R", C) : "";

    public static string Slug(string name)
    {
        var sb = new StringBuilder();
        foreach (var ch in name.ToLowerInvariant())
        {
            if (char.IsLetterOrDigit(ch)) sb.Append(ch);
            else if (sb.Length > 0 && sb[^1] != '-') sb.Append('-');
        }

        return sb.ToString().Trim('-');
    }
}
