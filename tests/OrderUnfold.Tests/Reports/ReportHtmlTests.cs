using Xunit;
using System.Globalization;
using System.Text.RegularExpressions;
using System.Xml.Linq;
using OrderUnfold.Outputs;
using OrderUnfold.Reports;
using OrderUnfold.Tests.CommandLine;

namespace OrderUnfold.Tests.Reports;

/// <summary>report.html of an unfold (the demo's, simulated data): every line of lines.csv in its table, the warnings and
/// notes, the tool version, well-formed and self-contained, hostile text escaped.</summary>
public sealed class ReportHtmlTests(DemoReport demo) : IClassFixture<DemoReport>
{
    private static readonly XNamespace X = "http://www.w3.org/1999/xhtml";

    [Fact]
    public void The_line_table_holds_every_line_of_lines_csv_with_the_same_values()
    {
        var page = DemoReport.Parse(demo.Html);
        var table = page.Descendants(X + "table").Single(t => (string?)t.Attribute("id") == "line-table");
        var rows = table.Element(X + "tbody")!.Elements(X + "tr").ToList();
        var csv = demo.LinesCsv();
        Assert.Equal(6, csv.Count); // the demo's six simulated lines (data/demo/truth.csv)
        Assert.Equal(csv.Count, rows.Count);
        for (var i = 0; i < csv.Count; i++)
        {
            var cells = rows[i].Elements(X + "td").ToList();
            var values = cells.Select(c => (string?)c.Attribute("data-value")).Where(v => v is not null)
                .Select(v => double.Parse(v!, CultureInfo.InvariantCulture)).ToList();
            foreach (var (column, text) in csv[i].Where(c => c.Key != "order_verdict" && c.Value.Length > 0))
                Assert.True(values.Contains(double.Parse(text, CultureInfo.InvariantCulture)), $"row {i + 1}: {column} = {text} is not in the table");
            Assert.Equal(DemoReport.Shown(csv[i]["frequency_hz"]), cells[1].Value);
            Assert.Contains(cells, c => c.Value == csv[i]["order_verdict"]);
        }
    }

    [Fact]
    public void The_page_is_well_formed_self_contained_and_names_the_tool_version_warnings_and_notes()
    {
        var page = DemoReport.Parse(demo.Html); // throws on any fault of structure
        var text = page.Root!.Value;
        Assert.Contains($"orderunfold {OrderUnfold.Cli.Cli.Version}", text);
        Assert.DoesNotMatch(new Regex(@"(src|href)\s*=\s*[""']?\s*(https?:)?//", RegexOptions.IgnoreCase), demo.Html);
        Assert.DoesNotContain("<link", demo.Html, StringComparison.OrdinalIgnoreCase);
        var report = OutputJson.Deserialize(Path.Combine(demo.Directory, "report.json"), File.ReadAllBytes(Path.Combine(demo.Directory, "report.json")),
            c => c.UnfoldReport, "report");
        foreach (var message in report.Warnings.Concat(report.Notes)) Assert.Contains(message, text);
        Assert.Contains(report.Warnings.Count == 0 ? "No warnings" : "Warnings (", text);
        foreach (var input in report.Inputs) Assert.Contains(input.Sha256, text);
        // warnings and verdicts come before the line table, the line table before the figures
        Assert.True(text.IndexOf("Warnings and verdicts", StringComparison.Ordinal) < text.IndexOf("Lines, strongest line", StringComparison.Ordinal));
        // every PNG the run wrote is in the page as a figure (the line groups as one figure per panel)
        var svgs = page.Descendants(XNamespace.Get("http://www.w3.org/2000/svg") + "svg").Count();
        Assert.True(svgs >= Directory.GetFiles(demo.Directory, "*.png").Length, $"{svgs} figures in the page");
        Assert.Single(page.Descendants(X + "script")); // the sorting script, and nothing else
    }

    [Fact]
    public void Without_plots_the_page_says_it_has_no_figures()
    {
        var report = OutputJson.Deserialize("report.json", File.ReadAllBytes(Path.Combine(demo.Directory, "report.json")), c => c.UnfoldReport, "report");
        var html = UnfoldHtml.Build(report, null).Render("9.9.9", report.CreatedUtc);
        var page = DemoReport.Parse(html);
        Assert.Empty(page.Descendants(XNamespace.Get("http://www.w3.org/2000/svg") + "svg"));
        Assert.Contains("--no-plots", page.Root!.Value);
        Assert.Contains("orderunfold 9.9.9", page.Root.Value);
    }

    [Fact]
    public void Hostile_text_in_a_sweep_name_and_a_warning_is_escaped_in_tables_and_figures()
    {
        const string hostile = "A_<script>alert(1)&amp;x'.csv"; // the sweep's name is its file name (a TOML string: no double quote)
        var folder = Path.Combine(demo.Directory, "hostile");
        var data = Path.Combine(AppContext.BaseDirectory, "demo");
        Directory.CreateDirectory(folder);
        foreach (var f in Directory.GetFiles(data)) File.Copy(f, Path.Combine(folder, Path.GetFileName(f) == "A_source.csv" ? hostile : Path.GetFileName(f)));
        var setup = Path.Combine(folder, "setup.toml");
        File.WriteAllText(setup, File.ReadAllText(setup).Replace("A_source.csv", hostile, StringComparison.Ordinal));
        var outDir = Path.Combine(folder, "out");
        var (code, _, err) = CliRun.Run("unfold", setup, "--out", outDir, "--quiet");
        Assert.True(code == 0, err);

        var html = File.ReadAllText(Path.Combine(outDir, HtmlPage.FileName));
        Assert.DoesNotContain("<script>alert", html, StringComparison.Ordinal);
        var page = DemoReport.Parse(html);
        Assert.Single(page.Descendants(X + "script"));
        Assert.Contains(hostile, page.Root!.Value); // shown as text, in the sweep table and in the figure titles

        var report = OutputJson.Deserialize("report.json", File.ReadAllBytes(Path.Combine(outDir, "report.json")), c => c.UnfoldReport, "report");
        var warned = UnfoldHtml.Build(report with { Warnings = ["<img src=x onerror=alert(2)> & \"quoted\""] }, null).Render(null, report.CreatedUtc);
        Assert.DoesNotContain("<img", warned, StringComparison.Ordinal);
        Assert.Contains("<img src=x onerror=alert(2)> & \"quoted\"", DemoReport.Parse(warned).Root!.Value);
    }
}
