using System.Globalization;
using System.Text.RegularExpressions;

namespace OrderUnfold.Plotting;

/// <summary>Turns an SVG document from an exporter into an element an HTML page can hold inline: no XML prolog or
/// document type, a view box instead of a fixed pixel size (so the page scales it), the natural width as its largest
/// width.</summary>
internal static partial class InlineSvg
{
    [GeneratedRegex(@"\s(width|height|viewBox|style|role|aria-label)=""[^""]*""", RegexOptions.CultureInvariant)]
    private static partial Regex SizeAttributes();

    [GeneratedRegex(@"\bid=""([^""]+)""|url\(#([^)]+)\)|href=""#([^""]+)""", RegexOptions.CultureInvariant)]
    private static partial Regex IdReferences();

    /// <summary>The <c>&lt;svg&gt;</c> element of <paramref name="document"/> with a view box of
    /// <paramref name="width"/> × <paramref name="height"/> and an accessible label.</summary>
    public static string FromDocument(string document, int width, int height, string? label = null)
    {
        var start = document.IndexOf("<svg", StringComparison.Ordinal);
        if (start < 0) throw new InvalidOperationException("the SVG exporter returned no <svg> element");
        var tagEnd = document.IndexOf('>', start);
        var tag = SizeAttributes().Replace(document[start..tagEnd], "");
        var w = width.ToString(CultureInfo.InvariantCulture);
        var h = height.ToString(CultureInfo.InvariantCulture);
        var aria = label is null ? "" : $" role=\"img\" aria-label=\"{System.Net.WebUtility.HtmlEncode(label)}\"";
        var root = $"{tag} viewBox=\"0 0 {w} {h}\" style=\"max-width:{w}px\"{aria}";
        return UniqueIds(root + document[tagEnd..].TrimEnd());
    }

    /// <summary>
    /// Gives the element's ids (the exporter's clip paths, numbered from 1 in every figure) a prefix of their own: ids
    /// are shared by the whole page, and a figure that referred to another figure's clip path would be cut wrongly. The
    /// prefix is taken from the element's content, so a figure always gets the same ids.
    /// </summary>
    private static string UniqueIds(string svg)
    {
        var prefix = "f" + Convert.ToHexStringLower(System.Security.Cryptography.SHA256.HashData(System.Text.Encoding.UTF8.GetBytes(svg)))[..10];
        return IdReferences().Replace(svg, m =>
            m.Groups[1].Success ? $"id=\"{prefix}-{m.Groups[1].Value}\"" :
            m.Groups[2].Success ? $"url(#{prefix}-{m.Groups[2].Value})" :
            $"href=\"#{prefix}-{m.Groups[3].Value}\"");
    }
}
