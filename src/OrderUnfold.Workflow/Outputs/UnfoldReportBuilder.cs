using System.Globalization;
using OrderUnfold.Calibration;
using OrderUnfold.Inversion;
using OrderUnfold.Pipeline;
using static OrderUnfold.Outputs.OutputJson;

namespace OrderUnfold.Outputs;

/// <summary>Builds the <see cref="UnfoldReport"/> record of an unfold run (report.json).</summary>
public static class UnfoldReportBuilder
{
    private const string UncertaintiesText =
        "standard errors from the fit covariance scaled by the reduced chi-square; frequency_crb_hz is the unscaled covariance (Cramér–Rao bound at the fit); frequency_sigma_hz includes the axis-calibration uncertainty, propagated from each axis fit's coefficient covariance, when it is known (its part: frequency_axis_sigma_hz); with a reduced chi-square below 1 (a pessimistic noise estimate) the scaled sigma lies below frequency_crb_hz by the factor sqrt(reduced chi-square)";

    /// <summary>The report of <paramref name="run"/>; <paramref name="toolVersion"/> defaults to the assembly's.</summary>
    public static UnfoldReport Build(UnfoldRun run, string? toolVersion = null)
    {
        var r = run.Result;
        var anchor = run.Setup.Solve.AnchorFrequencyHz;
        return new UnfoldReport(
            UnfoldReport.CurrentSchemaVersion,
            "orderunfold",
            toolVersion ?? typeof(UnfoldReportBuilder).Assembly.GetName().Version?.ToString(3),
            DateTime.UtcNow.ToString("yyyy-MM-ddTHH:mm:ssZ", CultureInfo.InvariantCulture),
            anchor is null ? "relative to the anchor (strongest) line, Hz" : "relative to the anchor line, Hz; absolute_frequency_hz adds the stated anchor frequency",
            run.Inputs.Select(i => new InputFileRecord(i.Role, i.Path, i.Bytes, i.Sha256)).ToList(),
            run.Instruments.Select(i => new ReportInstrument(i.Name, i.Geometry, Finite(i.LengthM), i.RefractiveIndex, Finite(i.FsrHz),
                Finite(i.Finesse), Finite(i.LinewidthHz), i.FinesseMeasured, CalibrationRecords.Families(i.Families))).ToList(),
            run.Calibrations.Select(Calibration).ToList(),
            run.FsrRefinement is { } fr ? CalibrationRecords.Fsr(fr) : null,
            Solve(run),
            Finite(r.ReducedChiSquare),
            r.Sweeps.Select((s, k) => SweepFit(s, k < run.Sweeps.Count ? run.Sweeps[k].Noise : null)).ToList(),
            Finite(anchor),
            Finite(ModeInputs.DetectionLimit(r)),
            r.OrdersResolved,
            r.OrdersResolved ? null : Finite(run.Instruments[0].FsrHz),
            run.Refinement is { } rd ? Refinement(rd) : null,
            r.OrdersResolved
                ? $"lines closer than {Units.Quantity.FormatFrequency(r.UnambiguousRangeHz)} apart cannot be an exact alias of one another for these instruments (alias margin ≥ 3 linewidths); each line's alias_delta_chi2 says how securely its order is pinned at this noise level"
                : "one instrument: the spectrum is folded into one FSR; orders are unknown",
            r.Lines.Select(l => Line(r, l, anchor)).ToList(),
            r.OffsetTrials.Select(t => new OffsetTrialRecord(t.Sweep, Finite(t.OffsetHz), Finite(t.ChiSquare), t.Chosen)).ToList(),
            run.AllWarnings.ToList(),
            run.Notes.ToList(),
            run.Window is { } w ? Window(w) : null);
    }

    /// <summary>One line as report.json gives it.</summary>
    public static ReportLine Line(UnfoldResult result, UnfoldedLine l, double? anchor) => new(
        Finite(l.FrequencyHz), Finite(l.FrequencySigmaHz), Finite(l.FrequencyCrbHz), Finite(l.FrequencyAxisSigmaHz), Finite(l.BootstrapSigmaHz),
        anchor is double a ? Finite(a + l.FrequencyHz) : null,
        Finite(l.Intensity), Finite(l.IntensityError), Finite(l.Snr), Finite(l.WidthHz), Finite(l.WidthSigmaHz),
        result.OrderVerdictOf(l), Finite(l.AliasShiftHz), Finite(l.AliasDeltaChiSquare), l.Note);

    private static SolveRecord Solve(UnfoldRun run)
    {
        var r = run.Result;
        var s = r.Solver;
        return new SolveRecord(Finite(r.Grid.StartHz), Finite(r.Grid.StepHz), r.Grid.Count, Finite(r.L1Weight), r.OrdersResolved,
            Finite(r.UnambiguousRangeHz), s.Method == NnlsMethod.Dense ? "dense" : "active-set", s.Reason, s.Status.ToString().ToLowerInvariant(),
            s.Message, s.Iterations, s.Removals, Finite(s.KktViolation), s.ActiveCount - run.Sweeps.Count);
    }

    private static SweepFitRecord SweepFit(SweepFit s, NoiseEstimate? noise) => new(
        s.Name, s.Instrument, s.Samples, Finite(s.OffsetHz), Finite(s.Gain), Finite(s.Background), Finite(s.NoiseSigma),
        noise is null ? null : new NoiseRecord(Finite(noise.SigmaBaseline), Finite(noise.QuantisationStep), Finite(noise.VarianceSlope), noise.Method),
        Finite(s.ChiSquare), Finite(s.ReducedChiSquare), Finite(s.ResidualRms));

    private static RefinementRecord Refinement(Analysis.RefinementDiagnostics d) => new(
        d.Converged, d.ExitReason, d.Iterations, Finite(d.ChiSquare), Finite(d.ReducedChiSquare), Finite(d.DetectionThresholdDeltaChiSquare),
        d.Dropped, d.FellBackToGrid, d.Groups, d.IterationsUsed, d.IterationBudget, d.BudgetExhausted, Finite(d.UnambiguousRangeHz),
        d.UnambiguousStatement, UncertaintiesText);

    private static ReportAxisCalibration Calibration(AxisCalibration c) => new(
        c.Instrument, c.Direction, c.Source, c.Method, c.Axis.Degree, c.PointCount, Finite(c.ResidualRmsHz),
        Finite(c.ResidualHz.Select(Math.Abs).DefaultIfEmpty(0).Max()), Finite(c.Finesse), Finite(c.FinesseSigma),
        c.Axis.Coefficients.Select(v => Finite(v)).ToList(), Finite(c.Axis.Center), Finite(c.Axis.HalfRange),
        CalibrationRecords.PeriodDecision(c.PeriodDecision), c.Warnings.ToList());

    private static WindowWideningRecord Window(WindowFinding w) => new(
        w.Reason, [Finite(w.FirstStartHz), Finite(w.FirstEndHz)], Finite(w.HalfWidthHz),
        w.NearAliases.Select(a => new NearAliasRecord(Finite(a.DeltaHz), Finite(a.MarginLinewidths))).ToList(), w.StillWider);
}
