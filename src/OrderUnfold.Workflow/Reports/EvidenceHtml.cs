using OrderUnfold.Outputs;

namespace OrderUnfold.Reports;

/// <summary>One scan axis as the report pages show it, from report.json's or calibration-report.json's record.</summary>
internal sealed record AxisEvidence(string Instrument, RampDirection Direction, string Source, string Method, int Degree, int Points,
    int? PairsUsed, int? PairsRejected, double? ResidualRmsHz, double? MaxResidualHz, double? Finesse, double? FinesseSigma,
    PeriodDecisionRecord? PeriodDecision, IReadOnlyList<string> Warnings);

/// <summary>The parts of the report pages that show the calibration evidence (axes, period decisions, transverse
/// families, FSR refinement, offset trials, window widening), the instruments and the inputs; shared by the unfold and
/// calibrate pages.</summary>
internal static class EvidenceHtml
{
    public static AxisEvidence AxisOf(ReportAxisCalibration a) => new(a.Instrument, a.Direction, a.Source, a.Method, a.Degree, a.Points,
        null, null, a.ResidualRmsHz, a.MaxResidualHz, a.Finesse, a.FinesseSigma, a.PeriodDecision, a.Warnings);

    public static AxisEvidence AxisOf(CalibrationAxisRecord a) => new(a.Instrument, a.Direction, a.Source, a.Method, a.Degree, a.Points,
        a.PairsUsed, a.PairsRejected, a.ResidualRmsHz, a.MaxResidualHz, a.Finesse, a.FinesseSigma, a.PeriodDecision, a.Warnings);

    /// <summary>The axes table, each axis's warnings and each axis's period decision with the candidates it weighed.</summary>
    public static void Axes(HtmlPage page, IReadOnlyList<AxisEvidence> axes)
    {
        page.Heading("Scan axes");
        var pairs = axes.Any(a => a.PairsUsed is not null || a.PairsRejected is not null); // self-calibrated axes only
        var headers = new List<string> { "instrument", "ramp", "from", "method", "degree", "points" };
        if (pairs) headers.AddRange(["repeat pairs used", "pairs rejected"]);
        headers.AddRange(["residual RMS", "largest residual", "finesse", "σ finesse"]);
        page.Table(new HtmlTable("Calibrated scan axes (calibration peaks fitted by a polynomial in the scan coordinate)", headers,
            axes.Select(a => (IReadOnlyList<HtmlCell>)[a.Instrument, Direction(a.Direction), a.Source, a.Method, Cells.Count(a.Degree), Cells.Count(a.Points),
                .. pairs ? (HtmlCell[])[Cells.Count(a.PairsUsed), Cells.Count(a.PairsRejected)] : [],
                Cells.Frequency(a.ResidualRmsHz, 3), Cells.Frequency(a.MaxResidualHz, 3), Cells.Number(a.Finesse, "F1"), Cells.Number(a.FinesseSigma, "F2")]).ToList())
        {
            Empty = "no axis was calibrated in this run",
        });
        foreach (var a in axes)
        {
            var name = $"{a.Instrument}, {Direction(a.Direction)} ramp";
            page.Messages($"Warnings of the axis {name}", a.Warnings, "warnings", $"Axis {name}: no warning.");
            if (a.PeriodDecision is not { } d) continue;
            page.Heading($"Period decision, {name}");
            page.Facts([("period", Cells.FrequencyText(d.PeriodHz, 8)), ("stated FSR", Cells.FrequencyText(d.StatedFsrHz, 8)),
                ("period in scan units", Cells.NumberText(d.PeriodScanUnits, "G6")), ("basis", d.Basis), ("peak groups", d.Fundamental)]);
            page.Table(new HtmlTable($"Periods weighed for {name}", ["candidate", "period (scan units)", "peaks explained", "predicted repeats",
                    "height agreement", "peak groups", "consistent", "chosen"],
                d.Candidates.Select(c => (IReadOnlyList<HtmlCell>)[c.Label, Cells.Number(c.PeriodScanUnits, "G6"), Cells.Number(c.Explained, "P0"),
                    Cells.Count(c.PredictedRepeats), Cells.Number(c.HeightAgreement, "F3"), Cells.Count(c.Groups), Cells.YesNo(c.Consistent),
                    new HtmlCell(c.Chosen ? "chosen" : "", Tone: c.Chosen ? "good" : null)]).ToList()));
            if (d.Families.Count > 0) page.Table(FamilyTable($"Transverse families seen by the period decision, {name}", d.Families));
        }
    }

    /// <summary>Each instrument's transverse families as the run settled them.</summary>
    public static void Families(HtmlPage page, IReadOnlyList<ReportInstrument> instruments)
    {
        page.Heading("Transverse families");
        var with = instruments.Where(i => i.TransverseFamilies.Count > 0).ToList();
        if (with.Count == 0) page.Paragraph("No instrument has a transverse family in this run.", "quiet");
        foreach (var i in with) page.Table(FamilyTable($"Transverse families of {i.Name}", i.TransverseFamilies));
    }

    private static HtmlTable FamilyTable(string caption, IReadOnlyList<FamilyRecord> families) => new(caption,
        ["family n", "Gouy offset (FSR)", "apparent offset (FSR)", "height (rel. to fundamental)", "basis"],
        families.Select(f => (IReadOnlyList<HtmlCell>)[Cells.Count(f.N), Cells.Number(f.GouyOffsetFsr, "F4"), Cells.Number(f.ApparentOffsetFsr, "F4"),
            Cells.Number(f.RelativeHeight, "F3"), f.Basis ?? ""]).ToList());

    /// <summary>The FSR refinement, when the run made one.</summary>
    public static void FsrRefinement(HtmlPage page, FsrRefinementRecord? fsr)
    {
        if (fsr is null) return;
        page.Heading("FSR refinement");
        page.Facts([("rounds", fsr.Rounds.ToString(System.Globalization.CultureInfo.InvariantCulture)),
            ("reduced χ² before → after", $"{Cells.NumberText(fsr.ReducedChi2Before, "F3") ?? Cells.Missing} → {Cells.NumberText(fsr.ReducedChi2After, "F3") ?? Cells.Missing}"),
            ("largest line shift", Cells.FrequencyText(fsr.MaxLineShiftHz, 3))]);
        page.Table(new HtmlTable("Refined FSRs", ["instrument", "nominal FSR", "refined FSR", "σ", "change (%)", "basis"],
            fsr.Instruments.Select(i => (IReadOnlyList<HtmlCell>)[i.Instrument, Cells.Frequency(i.NominalFsrHz, 9), Cells.Frequency(i.RefinedFsrHz, 9),
                Cells.Frequency(i.SigmaHz, 3), Cells.Number(i.RelativeChange * 100, "+0.0000;-0.0000"), i.Basis]).ToList()));
        page.Messages("Notes of the FSR refinement", fsr.Notes, "notes", "The FSR refinement left no note.");
    }

    /// <summary>The sweep offsets tried and the one chosen.</summary>
    public static void OffsetTrials(HtmlPage page, IReadOnlyList<OffsetTrialRecord> trials)
    {
        if (trials.Count == 0) return;
        page.Heading("Sweep offsets tried");
        page.Table(new HtmlTable("Offset candidates per sweep and their χ²", ["sweep", "offset", "χ²", "chosen"],
            trials.Select(t => (IReadOnlyList<HtmlCell>)[t.Sweep, Cells.Frequency(t.OffsetHz), Cells.Number(t.Chi2, "F1"),
                new HtmlCell(t.Chosen ? "chosen" : "", Tone: t.Chosen ? "good" : null)]).ToList()));
    }

    /// <summary>Why and how far the frequency window was widened.</summary>
    public static void Widening(HtmlPage page, WindowWideningRecord? widening)
    {
        if (widening is null) return;
        page.Heading("Window widening");
        page.Facts([("reason", widening.Reason),
            ("first window", string.Join(" to ", widening.FirstWindowHz.Select(h => Cells.FrequencyText(h) ?? Cells.Missing))),
            ("widened half-width", Cells.FrequencyText(widening.WidenedHalfWidthHz)),
            ("source wider than the widened window", widening.SourceWiderThanWidenedWindow ? "yes" : "no")]);
        page.Table(new HtmlTable("Shifts with a small alias margin", ["shift", "margin (linewidths)"],
            widening.NearAliases.Select(a => (IReadOnlyList<HtmlCell>)[Cells.Frequency(a.ShiftHz), Cells.Number(a.MarginLinewidths, "F2")]).ToList()));
    }

    /// <summary>The instruments as the run used them.</summary>
    public static HtmlTable InstrumentTable(IReadOnlyList<ReportInstrument> instruments) => new("Instruments",
        ["name", "geometry", "length", "refractive index", "FSR", "finesse", "finesse measured", "linewidth (FWHM)", "transverse families"],
        instruments.Select(i => (IReadOnlyList<HtmlCell>)[i.Name, OutputJson.Name(i.Geometry), Cells.Length(i.LengthM), Cells.Number(i.RefractiveIndex, "G6"),
            Cells.Frequency(i.FsrHz, 9), Cells.Number(i.Finesse, "F1"), Cells.YesNo(i.FinesseMeasured), Cells.Frequency(i.LinewidthHz, 4),
            Cells.Count(i.TransverseFamilies.Count)]).ToList());

    /// <summary>The input files with their size and SHA-256.</summary>
    public static HtmlTable InputTable(IEnumerable<InputFileRecord> inputs) => new("Input files (SHA-256 of each file's bytes as read)",
        ["role", "file", "bytes", "SHA-256"],
        inputs.Select(i => (IReadOnlyList<HtmlCell>)[i.Role, i.Path, Cells.Count(i.Bytes), new HtmlCell(i.Sha256, Tone: "hash")]).ToList())
    {
        Empty = "no input file recorded",
    };

    private static string Direction(RampDirection d) => d.ToString().ToLowerInvariant();
}
