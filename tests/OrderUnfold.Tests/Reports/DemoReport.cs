using System.Globalization;
using System.Xml;
using System.Xml.Linq;
using OrderUnfold.Reports;
using OrderUnfold.Tests.CommandLine;

namespace OrderUnfold.Tests.Reports;

/// <summary>One run of the demo (simulated data, with plots) into a temporary folder, shared by the report.html tests.</summary>
public sealed class DemoReport : IDisposable
{
    public DemoReport()
    {
        Directory = Path.Combine(Path.GetTempPath(), "orderunfold-report-tests-" + Guid.NewGuid().ToString("N")[..12]);
        var (code, _, err) = CliRun.Run("demo", "--out", Directory, "--quiet");
        if (code != 0) throw new InvalidOperationException($"the demo failed (exit {code}): {err}");
        Html = File.ReadAllText(Path.Combine(Directory, HtmlPage.FileName));
    }

    /// <summary>The demo's output folder.</summary>
    public string Directory { get; }

    /// <summary>Its report.html.</summary>
    public string Html { get; }

    /// <summary>The rows of its lines.csv, by column name.</summary>
    public IReadOnlyList<Dictionary<string, string>> LinesCsv()
    {
        var (header, rows) = OrderUnfold.Io.CsvTable.ReadText(File.ReadAllText(Path.Combine(Directory, "lines.csv")));
        return rows.Select(r => header.Select((h, i) => (h, r[i])).ToDictionary(p => p.h, p => p.Item2)).ToList();
    }

    /// <summary>Parses a page as XML (the pages are well-formed XML as well as HTML); throws on any fault.</summary>
    public static XDocument Parse(string html)
    {
        using var reader = XmlReader.Create(new StringReader(html), new XmlReaderSettings { DtdProcessing = DtdProcessing.Ignore });
        return XDocument.Load(reader);
    }

    /// <summary>The frequency of a lines.csv cell as the page shows it (7 significant digits with its unit).</summary>
    public static string Shown(string hz) => Quantity.FormatFrequency(double.Parse(hz, CultureInfo.InvariantCulture), 7);

    public void Dispose()
    {
        try { System.IO.Directory.Delete(Directory, recursive: true); } catch (IOException) { /* best effort */ }
    }
}
