using OrderUnfold.Outputs;
using OrderUnfold.Pipeline;

namespace OrderUnfold.Reports;

/// <summary>report.html of the modes command, from the record of modes.json: the requirement verdict and the notes first,
/// then the findings (main mode, spacing and length, mode count, SMSR, envelope, second family, folding), the mode table
/// (modes.csv), the figure, the input and the tool version.</summary>
public static class ModesHtml
{
    /// <summary>The page; <paramref name="figure"/> null when plots are off; <paramref name="inputs"/> the files read.</summary>
    public static HtmlPage Build(ModesReport report, string modesCsv, SvgFigure? figure, IReadOnlyList<InputFileRecord> inputs, string? toolVersion)
    {
        var page = new HtmlPage("Laser mode report", report.Source ?? "(unknown source)");
        page.Section("verdicts", "Verdict and notes");
        if (report.Verdict is { } v)
        {
            page.Paragraph(v.Line, v.Passed ? null : "bad");
            page.Table(new HtmlTable("Requirements", ["requirement", "met", "detail"],
                v.Requirements.Select(r => (IReadOnlyList<HtmlCell>)[r.Name, Cells.YesNo(r.Passed, "bad"), r.Text]).ToList()));
        }
        else
        {
            page.Paragraph("No requirement was stated (--require-smsr, --require-max-modes): no pass or fail.", "quiet");
        }

        page.Messages("Notes", report.Notes, "notes", "No notes.");
        page.Section("findings", "Findings").Facts(Findings(report));
        if (report.Folded is { } f)
        {
            page.Heading("Folded reading: spacing candidates");
            page.Facts([("choice", f.Choice), ("ambiguity", f.Ambiguity), ("second cavity", f.SecondCavity)]);
            page.Table(new HtmlTable("Spacings that explain the folded step", ["spacing", "σ spacing", "FSR multiple", "sign", "divisor",
                    "optical length", "physical length", "envelope FWHM", "in range"],
                f.Candidates.Select(c => (IReadOnlyList<HtmlCell>)[Cells.Frequency(c.SpacingHz), Cells.Frequency(c.SpacingSigmaHz, 3), Cells.Count(c.FsrMultiple),
                    Cells.Count(c.Sign), Cells.Count(c.Divisor), Cells.Length(c.OpticalLengthM), Cells.Length(c.PhysicalLengthM),
                    Cells.Frequency(c.EnvelopeFwhmHz, 4), Cells.YesNo(c.InRange)]).ToList()));
        }

        page.Section("modes", "Lines and their roles").Table(CsvHtml.Table("The lines (modes.csv)", modesCsv));
        page.Section("figure", "Figure").Figures(figure is null ? null : [figure]);
        page.Section("inputs", "Inputs").Table(EvidenceHtml.InputTable(inputs));
        page.Section("version", "Tool").Facts([("tool", "orderunfold"), ("version", toolVersion ?? "unknown"),
            ("modes.json schema version", report.SchemaVersion.ToString(System.Globalization.CultureInfo.InvariantCulture))]);
        return page;
    }

    private static IEnumerable<(string, string?)> Findings(ModesReport r)
    {
        yield return ("lines", $"{r.LineCount}" + (r.OrdersResolved ? " (orders resolved)" : " (one instrument: folded frequencies)"));
        yield return ("main mode", $"line {r.MainMode.Line} at {Cells.FrequencyText(r.MainMode.FrequencyHz) ?? Cells.Missing}");
        if (r.Spacing is { } s)
        {
            yield return ("mode spacing", PlusMinus(Cells.FrequencyText(s.SpacingHz, 8), Cells.FrequencyText(s.SpacingSigmaHz, 3)));
            yield return ("optical length c/(2Δ)", PlusMinus(Length(s.OpticalLengthM), Length(s.OpticalLengthSigmaM)));
            yield return ("physical length", s.PhysicalLengthM is null ? null : PlusMinus(Length(s.PhysicalLengthM), Length(s.PhysicalLengthSigmaM)));
        }

        if (r.Comb is { } c)
            yield return ("comb", $"{c.Members} members, k = {c.FirstK}…{c.LastK}" + (c.MissingK.Count > 0 ? $", missing k: {string.Join(", ", c.MissingK)}" : "") +
                (Cells.FrequencyText(c.RmsResidualHz, 3) is { } rms ? $", residual RMS {rms}" : ""));
        yield return ("modes within " + (Cells.NumberText(r.ModeCount.WithinDb, "0.#") ?? "?") + " dB", $"{r.ModeCount.Total} ({r.ModeCount.MainComb} main comb, " +
            $"{r.ModeCount.SecondFamily} second family, {r.ModeCount.OffComb} off comb)");
        yield return ("side-mode suppression", (r.Smsr.ValueDb is { } db ? PlusMinus(Cells.NumberText(db, "F2") + " dB", r.Smsr.SigmaDb is { } sd ? Cells.NumberText(sd, "G2") + " dB" : null) : "not measured")
            + $" ({r.Smsr.Kind}): {r.Smsr.Explanation}");
        var e = r.Envelope;
        yield return ("gain envelope", e.Fitted
            ? $"centre {PlusMinus(Cells.FrequencyText(e.CentreHz), Cells.FrequencyText(e.CentreSigmaHz, 3))}, FWHM {PlusMinus(Cells.FrequencyText(e.FwhmHz, 4), Cells.FrequencyText(e.FwhmSigmaHz, 3))} ({e.ModesUsed} modes)"
            : e.Message);
        if (r.SecondFamily is { } sf)
            yield return ("second mode family", $"{sf.Members} lines, offset {PlusMinus(Cells.FrequencyText(sf.OffsetHz), Cells.FrequencyText(sf.OffsetSigmaHz, 3))}");
        yield return ("detection limit (relative intensity)", Cells.NumberText(r.DetectionLimit, "G3"));
    }

    private static string? Length(double? m) => m is double v && double.IsFinite(v) ? Quantity.FormatLength(v) : null;

    private static string PlusMinus(string? value, string? sigma) => (value ?? Cells.Missing) + (sigma is null ? "" : $" ± {sigma}");
}
