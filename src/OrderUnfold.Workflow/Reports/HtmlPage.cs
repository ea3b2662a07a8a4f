using System.Text;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using static System.Net.WebUtility;

namespace OrderUnfold.Reports;

/// <summary>
/// report.html, composed: a header, sections in order with a contents list, warnings, fact lists, tables and inline SVG
/// figures; the style sheet and the sorting script inline (<see cref="HtmlStyle"/>), nothing loaded from elsewhere.
/// Every text is HTML-escaped here; the figures come escaped from their exporter. The page is also well-formed XML, so it
/// can be checked by any XML parser.
/// </summary>
public sealed class HtmlPage
{
    /// <summary>File name of the page beside every command's outputs.</summary>
    public const string FileName = "report.html";

    private readonly StringBuilder _body = new();
    private readonly List<(string Id, string Title)> _sections = [];
    private readonly string _title;
    private readonly string _subtitle;
    private bool _inSection;

    /// <summary>A page titled <paramref name="title"/>; <paramref name="subtitle"/> names the run (setup, folder).</summary>
    public HtmlPage(string title, string subtitle)
    {
        _title = title;
        _subtitle = subtitle;
    }

    /// <summary>Starts a section (closing the previous one) and lists it in the contents.</summary>
    public HtmlPage Section(string id, string title)
    {
        CloseSection();
        _sections.Add((id, title));
        _body.Append("<section id=\"").Append(HtmlEncode(id)).Append("\">\n<h2>").Append(HtmlEncode(title)).Append("</h2>\n");
        _inSection = true;
        return this;
    }

    /// <summary>A smaller heading inside a section.</summary>
    public HtmlPage Heading(string text)
    {
        _body.Append("<h3>").Append(HtmlEncode(text)).Append("</h3>\n");
        return this;
    }

    /// <summary>A paragraph; <paramref name="tone"/> is a class (<c>note</c>, <c>bad</c>…) or null.</summary>
    public HtmlPage Paragraph(string text, string? tone = null)
    {
        _body.Append(tone is null ? "<p>" : $"<p class=\"{HtmlEncode(tone)}\">").Append(HtmlEncode(text)).Append("</p>\n");
        return this;
    }

    /// <summary>A list of messages in a box of tone <paramref name="tone"/> (<c>warnings</c>, <c>notes</c>); when there is
    /// none, <paramref name="none"/> as a plain sentence.</summary>
    public HtmlPage Messages(string title, IEnumerable<string> messages, string tone, string none)
    {
        var list = messages.ToList();
        if (list.Count == 0) return Paragraph(none, "quiet");
        _body.Append("<div class=\"box ").Append(HtmlEncode(tone)).Append("\"><p class=\"box-title\">").Append(HtmlEncode($"{title} ({list.Count})"))
            .Append("</p>\n<ul>\n");
        foreach (var m in list) _body.Append("<li>").Append(HtmlEncode(m)).Append("</li>\n");
        _body.Append("</ul></div>\n");
        return this;
    }

    /// <summary>Name–value pairs (a definition list); a pair with a null value is left out.</summary>
    public HtmlPage Facts(IEnumerable<(string Name, string? Value)> facts)
    {
        _body.Append("<dl class=\"facts\">\n");
        foreach (var (name, value) in facts.Where(f => f.Value is not null))
            _body.Append("<dt>").Append(HtmlEncode(name)).Append("</dt><dd>").Append(HtmlEncode(value)).Append("</dd>\n");
        _body.Append("</dl>\n");
        return this;
    }

    /// <summary>A table (see <see cref="HtmlTable"/>).</summary>
    public HtmlPage Table(HtmlTable table)
    {
        table.WriteTo(_body);
        return this;
    }

    /// <summary>Figures, inline; with <paramref name="figures"/> null (plots off) a sentence that says why there is none.</summary>
    public HtmlPage Figures(IReadOnlyList<SvgFigure>? figures)
    {
        if (figures is null)
        {
            _body.Append("<p class=\"quiet\">Figures are not included: the run was made with --no-plots.</p>\n");
            return this;
        }

        _body.Append("<div class=\"figures\">\n");
        foreach (var f in figures)
            _body.Append("<figure style=\"width:").Append(f.Width.ToString(System.Globalization.CultureInfo.InvariantCulture)).Append("px\">").Append(f.Svg).Append("<figcaption>").Append(HtmlEncode(f.Caption)).Append("</figcaption></figure>\n");
        _body.Append("</div>\n");
        return this;
    }

    /// <summary>The whole page; <paramref name="toolVersion"/> and <paramref name="createdUtc"/> go into its header and foot.</summary>
    public string Render(string? toolVersion, string createdUtc)
    {
        CloseSection();
        var version = $"orderunfold {toolVersion ?? "(version unknown)"}";
        var html = new StringBuilder(_body.Length + 8192);
        html.Append("<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n")
            .Append("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n")
            .Append("<meta name=\"generator\" content=\"").Append(HtmlEncode(version)).Append("\"/>\n")
            .Append("<title>").Append(HtmlEncode($"{_title} · {_subtitle}")).Append("</title>\n<style>").Append(HtmlStyle.Css).Append("</style>\n</head>\n<body>\n")
            .Append("<header><p class=\"tool\">").Append(HtmlEncode(version)).Append("</p><h1>").Append(HtmlEncode(_title)).Append("</h1><p class=\"run\">")
            .Append(HtmlEncode(_subtitle)).Append("</p><p class=\"run\">").Append(HtmlEncode($"written {createdUtc}")).Append("</p></header>\n");
        html.Append("<nav><p class=\"box-title\">Contents</p><ol>\n");
        foreach (var (id, title) in _sections)
            html.Append("<li><a href=\"#").Append(HtmlEncode(id)).Append("\">").Append(HtmlEncode(title)).Append("</a></li>\n");
        html.Append("</ol></nav>\n<main>\n").Append(_body).Append("</main>\n<footer><p>")
            .Append(HtmlEncode($"Written by {version} on {createdUtc}. This page is self-contained: it loads nothing from elsewhere; tables sort by a click on their headers where scripts run."))
            .Append("</p></footer>\n<script>").Append(HtmlStyle.SortScript).Append("</script>\n</body>\n</html>\n");
        return html.ToString();
    }

    /// <summary>Writes the page into <paramref name="directory"/> as <paramref name="fileName"/> (default <see cref="FileName"/>;
    /// atomically, or directly into a staging folder when <paramref name="staged"/>); returns its path.</summary>
    public string Write(string directory, string? toolVersion, string createdUtc, bool staged = false, string fileName = FileName)
    {
        var path = Path.Combine(directory, fileName);
        AtomicFile.WriteAllText(path, Render(toolVersion, createdUtc), staged);
        return path;
    }

    /// <summary>The time a page is written, in the outputs' format (UTC, to the second).</summary>
    public static string Now() => DateTime.UtcNow.ToString("yyyy-MM-dd'T'HH:mm:ss'Z'", System.Globalization.CultureInfo.InvariantCulture);

    /// <summary>Size and SHA-256 of input files (those that exist; a file that has gone is left out), for the inputs table of
    /// a command that records no hashes of its own.</summary>
    public static IReadOnlyList<Outputs.InputFileRecord> Describe(params (string Role, string Path)[] files) =>
        files.Where(f => File.Exists(f.Path)).DistinctBy(f => Path.GetFullPath(f.Path))
            .Select(f => UnfoldPipeline.Describe(f.Role, f.Path)).Select(i => new Outputs.InputFileRecord(i.Role, i.Path, i.Bytes, i.Sha256)).ToList();

    private void CloseSection()
    {
        if (!_inSection) return;
        _body.Append("</section>\n");
        _inSection = false;
    }
}
