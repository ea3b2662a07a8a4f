using OrderUnfold.Outputs;
using OrderUnfold.Pipeline;

namespace OrderUnfold.Reports;

/// <summary>What the plan command decided, as its console states it.</summary>
/// <param name="Heading">"Recommended:", "Best found (does not meet the required margin):", …</param>
/// <param name="Passed">True when the design meets the margin and its what-if (if any) confirms it.</param>
/// <param name="Settings">The settings line (span, required margin).</param>
/// <param name="Description">The design, one "name: value" line each (<see cref="Planning.PlanReport.Describe"/>).</param>
/// <param name="WhatIf">The what-if summary, or null when none ran.</param>
public sealed record PlanVerdict(string Heading, bool Passed, string Settings, string Description, string? WhatIf);

/// <summary>report.html of the plan command: the verdict and the chosen design first, the what-if, the figures, the ranked
/// designs (plan.csv; the first 100), the inputs and the tool version.</summary>
public static class PlanHtml
{
    /// <summary>The page; <paramref name="figures"/> null when plots are off.</summary>
    public static HtmlPage Build(PlanVerdict verdict, string planCsv, IReadOnlyList<SvgFigure>? figures, IReadOnlyList<InputFileRecord> inputs, string? toolVersion)
    {
        var page = new HtmlPage("Cavity plan", verdict.Settings);
        page.Section("verdicts", "Verdict").Paragraph(verdict.Heading, verdict.Passed ? null : "bad").Facts(Lines(verdict.Description));
        if (verdict.WhatIf is { } w) page.Heading("What-if simulation").Facts(Lines(w));
        page.Section("figures", "Figures").Figures(figures);
        page.Section("designs", "Designs ranked").Table(CsvHtml.Table("Designs in ranked order (plan.csv)", planCsv, maxRows: 100));
        page.Section("inputs", "Inputs").Table(EvidenceHtml.InputTable(inputs) with { Empty = "none: the plan was made from the command line alone" });
        page.Section("version", "Tool").Facts([("tool", "orderunfold"), ("version", toolVersion ?? "unknown")]);
        return page;
    }

    /// <summary>"  name: value" lines as facts; a line without a name is a fact of its own.</summary>
    private static IEnumerable<(string, string?)> Lines(string text) =>
        text.Split('\n', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries).Select(line =>
        {
            var colon = line.IndexOf(": ", StringComparison.Ordinal);
            return colon > 0 && colon < 60 ? (line[..colon], (string?)line[(colon + 2)..]) : ("", line);
        });
}
