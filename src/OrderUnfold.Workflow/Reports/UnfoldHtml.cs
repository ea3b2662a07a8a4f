using OrderUnfold.Analysis;
using OrderUnfold.Outputs;
using OrderUnfold.Pipeline;

namespace OrderUnfold.Reports;

/// <summary>
/// report.html of an unfold, from the same record as report.json: warnings and verdicts first, then the line table (the
/// values of lines.csv, formatted for people), the spectrum, each sweep's fit, the calibration evidence, the instruments,
/// the solve, the inputs with their SHA-256 and the tool version.
/// </summary>
public static class UnfoldHtml
{
    /// <summary>The page of <paramref name="report"/>; <paramref name="figures"/> null when the run draws no plots.</summary>
    public static HtmlPage Build(UnfoldReport report, IReadOnlyList<SvgFigure>? figures)
    {
        var setup = report.Inputs.FirstOrDefault(i => i.Role == "setup")?.Path ?? "(no setup file)";
        var page = new HtmlPage("Unfold report", setup);
        page.Section("verdicts", "Warnings and verdicts")
            .Messages("Warnings", report.Warnings, "warnings", "No warnings: every check of the run passed.")
            .Messages("Notes", report.Notes, "notes", "No notes.")
            .Facts(Verdicts(report));
        page.Section("lines", "Lines").Paragraph($"The same values as lines.csv, which gives them as numbers (frequencies {report.Frequencies}); here each with its unit.").Table(LineTable(report));
        page.Section("spectrum", "Spectrum").Figures(Pick(figures, FigureTopic.Spectrum, FigureTopic.Other));
        page.Section("sweeps", "Sweeps and their fits").Table(SweepTable(report.Sweeps)).Figures(Pick(figures, FigureTopic.Sweep));
        page.Section("calibration", "Calibration evidence");
        EvidenceHtml.Axes(page, report.Calibrations.Select(EvidenceHtml.AxisOf).ToList());
        EvidenceHtml.Families(page, report.Instruments);
        EvidenceHtml.FsrRefinement(page, report.FsrRefinement);
        EvidenceHtml.OffsetTrials(page, report.OffsetTrials);
        EvidenceHtml.Widening(page, report.WindowWidening);
        page.Figures(Pick(figures, FigureTopic.Calibration));
        page.Section("instruments", "Instruments").Table(EvidenceHtml.InstrumentTable(report.Instruments));
        page.Section("solve", "Solve").Facts(SolveFacts(report));
        page.Section("inputs", "Inputs").Table(EvidenceHtml.InputTable(report.Inputs));
        page.Section("version", "Tool").Facts([("tool", report.Tool), ("version", report.ToolVersion ?? "unknown"),
            ("report.json schema version", report.SchemaVersion.ToString(System.Globalization.CultureInfo.InvariantCulture)), ("written (UTC)", report.CreatedUtc)]);
        return page;
    }

    /// <summary>Writes report.html of an unfold beside its other outputs; returns its path.</summary>
    public static string Write(string directory, UnfoldReport report, IReadOnlyList<SvgFigure>? figures, bool staged = false) =>
        Build(report, figures).Write(directory, report.ToolVersion, report.CreatedUtc, staged);

    private static IReadOnlyList<SvgFigure>? Pick(IReadOnlyList<SvgFigure>? figures, params FigureTopic[] topics) =>
        figures?.Where(f => topics.Contains(f.Topic)).ToList();

    private static IEnumerable<(string, string?)> Verdicts(UnfoldReport report)
    {
        var counts = report.Lines.GroupBy(l => l.OrderVerdict).OrderBy(g => g.Key)
            .Select(g => $"{g.Count()} {OutputJson.Name(g.Key)}");
        yield return ("lines found", $"{report.Lines.Count}" + (report.Lines.Count > 0 ? $" ({string.Join(", ", counts)})" : ""));
        yield return ("orders", report.OrdersResolved switch
        {
            true => "resolved (two or more instruments)",
            false => "unknown: one instrument folds the spectrum into one FSR" + (Cells.FrequencyText(report.FoldingFsrHz) is { } f ? $" ({f})" : ""),
            null => null,
        });
        yield return ("unambiguous range", report.UnambiguousRangeStatement);
        yield return ("reduced χ² of the fit", Cells.NumberText(report.ReducedChi2, "F3"));
        if (report.Refinement is { } r)
        {
            yield return ("line refinement", (r.Converged ? "converged" : "did not converge") + $" ({r.ExitReason}; {r.Iterations} iterations)" +
                (r.FellBackToGrid ? "; fell back to the grid solution" : ""));
            yield return ("uncertainties", r.Uncertainties);
            yield return ("refinement budget", r.BudgetExhausted is { } b ? $"exhausted: {b}" : null);
        }

        yield return ("solver", report.Solve is { } s ? $"{s.Solver}: {s.SolverStatus}" + (s.SolverMessage is { } m ? $" ({m})" : "") : null);
        yield return ("detection limit (relative intensity)", Cells.NumberText(report.DetectionLimit, "G3"));
    }

    /// <summary>The line table: the columns of lines.csv (and the note), units in the headers.</summary>
    internal static HtmlTable LineTable(UnfoldReport report)
    {
        var widths = report.Lines.Any(l => l.FwhmHz is not null);
        var absolute = report.AnchorFrequencyHz is not null;
        var notes = report.Lines.Any(l => !string.IsNullOrEmpty(l.Note));
        var headers = new List<string> { "#", "frequency", "σ frequency", "σ Cramér–Rao", "σ axis" };
        if (absolute) headers.Add("absolute frequency");
        headers.AddRange(["intensity (rel.)", "σ intensity", "SNR"]);
        if (widths) headers.AddRange(["FWHM", "σ FWHM"]);
        headers.AddRange(["order verdict", "nearest alias shift", "alias Δχ²"]);
        if (notes) headers.Add("note");
        var rows = report.Lines.Select((l, i) =>
        {
            var row = new List<HtmlCell> { Cells.Count(i + 1), Cells.Frequency(l.FrequencyHz), Cells.Frequency(l.FrequencySigmaHz, 3),
                Cells.Frequency(l.FrequencyCrbHz, 3), Cells.Frequency(l.FrequencyAxisSigmaHz, 3) };
            if (absolute) row.Add(Cells.Frequency(l.AbsoluteFrequencyHz, 10));
            row.AddRange([Cells.Number(l.Intensity, "F4"), Cells.Number(l.IntensitySigma, "F4"), Cells.Number(l.Snr, "F0")]);
            if (widths) row.AddRange([Cells.Frequency(l.FwhmHz, 4), Cells.Frequency(l.FwhmSigmaHz, 3)]);
            row.AddRange([Cells.Verdict(l.OrderVerdict), Cells.Frequency(l.AliasShiftHz), Cells.Number(l.AliasDeltaChi2, "G4")]);
            if (notes) row.Add(l.Note ?? "");
            return (IReadOnlyList<HtmlCell>)row;
        }).ToList();
        return new HtmlTable("Lines, strongest line at 0 Hz unless an anchor frequency is set", headers, rows) { Id = "line-table", Empty = "no line found" };
    }

    private static HtmlTable SweepTable(IReadOnlyList<SweepFitRecord> sweeps) => new("How each sweep was fitted",
        ["#", "sweep", "instrument", "samples", "offset", "gain", "background", "noise σ", "χ²", "reduced χ²", "residual RMS"],
        sweeps.Select((s, i) => (IReadOnlyList<HtmlCell>)[Cells.Count(i + 1), s.Name, s.Instrument, Cells.Count(s.Samples), Cells.Frequency(s.OffsetHz),
            Cells.Number(s.Gain), Cells.Number(s.Background), Cells.Number(s.NoiseSigma, "G3"), Cells.Number(s.Chi2, "F1"),
            Cells.Number(s.ReducedChi2, "F3"), Cells.Number(s.ResidualRms, "G3")]).ToList());

    private static IEnumerable<(string, string?)> SolveFacts(UnfoldReport report)
    {
        if (report.Solve is not { } s) yield break;
        yield return ("grid", $"{s.GridBins} bins from {Cells.FrequencyText(s.GridStartHz)} in steps of {Cells.FrequencyText(s.GridStepHz, 4)}");
        yield return ("solver", $"{s.Solver} ({s.SolverReason})");
        yield return ("status", s.SolverStatus + (s.SolverMessage is { } m ? $": {m}" : ""));
        yield return ("iterations, removals", $"{s.SolverIterations}, {s.SolverRemovals}");
        yield return ("KKT violation", Cells.NumberText(s.KktViolation, "G3"));
        yield return ("L1 weight", Cells.NumberText(s.L1Weight, "G4"));
        yield return ("non-zero bins", s.NonzeroBins.ToString(System.Globalization.CultureInfo.InvariantCulture));
        yield return ("anchor frequency", Cells.FrequencyText(report.AnchorFrequencyHz, 10));
    }
}
