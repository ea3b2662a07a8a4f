using OrderUnfold.Outputs;
using OrderUnfold.Pipeline;

namespace OrderUnfold.Reports;

/// <summary>report.html of the calibrate command, from the record of calibration-report.json: warnings first, then the
/// instruments (calibrated against stated), the scan axes with their period decisions, finesse fits and transverse
/// modes, the FSR refinement, the figures, the inputs and the tool version.</summary>
public static class CalibrationHtml
{
    /// <summary>The page; <paramref name="figures"/> null when plots are off.</summary>
    public static HtmlPage Build(CalibrationReportRecord report, IReadOnlyList<SvgFigure>? figures, IReadOnlyList<InputFileRecord> inputs)
    {
        var page = new HtmlPage("Calibration report", report.Source);
        page.Section("verdicts", "Warnings").Messages("Warnings", report.Warnings, "warnings", "No warnings: every check of the calibration passed.");
        page.Section("instruments", "Instruments").Table(new HtmlTable("Instruments: calibrated against stated",
            ["name", "geometry", "FSR", "stated FSR", "finesse", "stated finesse", "linewidth (FWHM)"],
            report.Instruments.Select(i => (IReadOnlyList<HtmlCell>)[i.Name, OutputJson.Name(i.Geometry), Cells.Frequency(i.FsrHz, 9),
                Cells.Frequency(i.StatedFsrHz, 9), Cells.Number(i.Finesse, "F1"), Cells.Number(i.StatedFinesse, "F1"), Cells.Frequency(i.LinewidthHz, 4)]).ToList()));
        page.Section("calibration", "Calibration evidence");
        EvidenceHtml.Axes(page, report.Axes.Select(EvidenceHtml.AxisOf).ToList());
        page.Heading("Finesse fits");
        page.Table(new HtmlTable("Finesse per axis (Airy fits over the peaks)", ["instrument", "ramp", "weighted mean", "σ", "peaks", "scatter χ²",
                "consistent", "peak shape Airy-like", "shape RMS deviation"],
            report.Axes.Where(a => a.FinesseFit is not null).Select(a => (IReadOnlyList<HtmlCell>)[a.Instrument, a.Direction.ToString().ToLowerInvariant(),
                Cells.Number(a.FinesseFit!.WeightedMean, "F1"), Cells.Number(a.FinesseFit.Sigma, "F2"), Cells.Count(a.FinesseFit.Peaks),
                Cells.Number(a.FinesseFit.ScatterChi2, "F2"), Cells.YesNo(a.FinesseFit.Consistent, "warn"),
                a.FinesseFit.ProfileAiryShaped is bool shaped ? Cells.YesNo(shaped, "warn") : Cells.Missing, Cells.Number(a.FinesseFit.ProfileRmsDeviation, "G3")]).ToList())
        {
            Empty = "no finesse was fitted",
        });
        TransverseModes(page, report.Axes);
        EvidenceHtml.FsrRefinement(page, report.FsrRefinement);
        page.Figures(figures);
        page.Section("inputs", "Inputs").Table(EvidenceHtml.InputTable(inputs));
        page.Section("version", "Tool").Facts([("tool", report.Tool), ("version", report.ToolVersion ?? "unknown"),
            ("calibration-report.json schema version", report.SchemaVersion.ToString(System.Globalization.CultureInfo.InvariantCulture)), ("written (UTC)", report.CreatedUtc)]);
        return page;
    }

    private static void TransverseModes(HtmlPage page, IReadOnlyList<CalibrationAxisRecord> axes)
    {
        page.Heading("Transverse modes in the calibration sweeps");
        var with = axes.Where(a => a.TransverseModes is { Families.Count: > 0 }).ToList();
        if (with.Count == 0) page.Paragraph("No transverse family was found in any calibration sweep.", "quiet");
        foreach (var a in with)
        {
            var t = a.TransverseModes!;
            page.Table(new HtmlTable($"Families beside the {t.MainPeaks} main peaks, {a.Instrument}, {a.Direction.ToString().ToLowerInvariant()} ramp",
                ["offset (FSR)", "height (rel. to main)", "peaks", "periods", "half period"],
                t.Families.Select(f => (IReadOnlyList<HtmlCell>)[Cells.Number(f.OffsetFsr, "F4"), Cells.Number(f.RelativeHeight, "F3"), Cells.Count(f.Count),
                    Cells.Count(f.Periods), Cells.YesNo(f.HalfPeriod)]).ToList()));
        }
    }
}
