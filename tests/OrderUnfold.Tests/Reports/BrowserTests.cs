using Xunit;
using System.Diagnostics;
using SkiaSharp;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Reports;

/// <summary>
/// The demo's report.html rendered by a real browser: Debian's headless Chromium (/usr/bin/chromium, or
/// ORDERUNFOLD_CHROMIUM). The DOM it builds must show the line table with every line of lines.csv, and its screenshot
/// must not be blank. Category Browser: left out of the default run (tests/OrderUnfold.Tests/default.runsettings) and
/// run by CI (.ci/run) with <c>--filter Category=Browser</c>, where a missing browser fails the test. The screenshot is
/// kept at ORDERUNFOLD_BROWSER_SCREENSHOT when that is set.
/// </summary>
[Trait("Category", "Browser")]
public sealed class BrowserTests(DemoReport demo, ITestOutputHelper output) : IClassFixture<DemoReport>
{
    /// <summary>A browser that does not answer within this time has hung (common practice for a one-page render: seconds).</summary>
    private static readonly TimeSpan Budget = TimeSpan.FromSeconds(120);

    [Fact]
    public void Chromium_builds_a_page_with_the_line_table_and_every_line_of_lines_csv()
    {
        var dom = Chromium("--dump-dom");
        Assert.Contains("id=\"line-table\"", dom);
        var page = DemoReport.Parse(ToXml(dom));
        var table = page.Descendants().Single(e => e.Name.LocalName == "table" && (string?)e.Attribute("id") == "line-table");
        var rows = table.Descendants().Where(e => e.Name.LocalName == "tr").Skip(1).ToList(); // the header row first
        var csv = demo.LinesCsv();
        Assert.Equal(csv.Count, rows.Count);
        var shown = rows.Select(r => r.Value).ToList();
        foreach (var line in csv)
            Assert.Contains(shown, text => text.Contains(DemoReport.Shown(line["frequency_hz"]), StringComparison.Ordinal) &&
                                           text.Contains(line["order_verdict"], StringComparison.Ordinal));
        // the script ran in the browser: the headers became sortable
        Assert.Contains("sortable-head", dom);
    }

    [Fact]
    public void Chromium_draws_a_screenshot_that_is_not_blank()
    {
        var path = Environment.GetEnvironmentVariable("ORDERUNFOLD_BROWSER_SCREENSHOT") is { Length: > 0 } kept
            ? Path.GetFullPath(kept)
            : Path.Combine(demo.Directory, "report-screenshot.png");
        Chromium($"--screenshot={path}", "--window-size=1280,2400");
        output.WriteLine($"screenshot: {path}");
        using var bitmap = SKBitmap.Decode(path);
        Assert.NotNull(bitmap);
        Assert.Equal((1280, 2400), (bitmap.Width, bitmap.Height));
        var (inked, colours) = Ink(bitmap);
        output.WriteLine($"non-white pixels {inked:P1}, distinct colours (4 bits per channel) {colours}");
        // a page of text, tables and plots on white: the header band alone covers about 5 %; a blank or failed render
        // is white (or one colour) throughout
        Assert.True(inked > 0.08, $"only {inked:P1} of the pixels are not white");
        Assert.True(colours >= 12, $"only {colours} distinct colours");
    }

    /// <summary>Share of pixels that are not (nearly) white, and the number of distinct colours at 4 bits per channel.</summary>
    private static (double Inked, int Colours) Ink(SKBitmap bitmap)
    {
        var inked = 0L;
        var colours = new HashSet<int>();
        for (var y = 0; y < bitmap.Height; y += 2)
        {
            for (var x = 0; x < bitmap.Width; x += 2)
            {
                var c = bitmap.GetPixel(x, y);
                if (c.Red < 245 || c.Green < 245 || c.Blue < 245) inked++;
                colours.Add((c.Red >> 4) << 8 | (c.Green >> 4) << 4 | c.Blue >> 4);
            }
        }

        return (inked / (double)((bitmap.Height + 1) / 2 * ((bitmap.Width + 1) / 2)), colours.Count);
    }

    /// <summary>Runs headless Chromium on the demo's report.html with a fresh profile; returns its standard output.</summary>
    private string Chromium(params string[] task)
    {
        var exe = Environment.GetEnvironmentVariable("ORDERUNFOLD_CHROMIUM") is { Length: > 0 } given ? given : "/usr/bin/chromium";
        Assert.True(File.Exists(exe), $"no Chromium at {exe}: install Debian's (apt-get install -y chromium) or set ORDERUNFOLD_CHROMIUM");
        var profile = Directory.CreateTempSubdirectory("orderunfold-chromium-");
        try
        {
            var start = new ProcessStartInfo(exe) { RedirectStandardOutput = true, RedirectStandardError = true };
            foreach (var a in (string[])["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run", "--disable-background-networking",
                         "--disable-component-update", "--disable-sync", $"--user-data-dir={profile.FullName}", .. task,
                         new Uri(Path.Combine(demo.Directory, "report.html")).AbsoluteUri])
                start.ArgumentList.Add(a);
            using var browser = Process.Start(start)!;
            var stdout = browser.StandardOutput.ReadToEndAsync();
            var stderr = browser.StandardError.ReadToEndAsync();
            if (!browser.WaitForExit(Budget))
            {
                browser.Kill(entireProcessTree: true);
                Assert.Fail($"Chromium did not finish within {Budget.TotalSeconds} s");
            }

            Assert.True(browser.ExitCode == 0, $"Chromium exited with {browser.ExitCode}: {stderr.Result}");
            return stdout.Result;
        }
        finally
        {
            profile.Delete(recursive: true);
        }
    }

    /// <summary>Chromium's serialised DOM is HTML, not XML: its void elements are not closed. Close them so that the same
    /// XML reader reads the table.</summary>
    private static string ToXml(string dom) =>
        System.Text.RegularExpressions.Regex.Replace(dom, @"<(meta|br|hr|img|input|link)\b([^>]*?)\s*/?>", "<$1$2/>")
            .Replace("<!DOCTYPE html>", "", StringComparison.OrdinalIgnoreCase);
}
