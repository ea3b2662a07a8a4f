using System.Globalization;
using OrderUnfold.Simulation;

namespace OrderUnfold.Cli.CommandLine;

/// <summary>
/// The one syntax of <c>--lines</c> (simulate, plan --simulate): comma-separated entries
/// <c>frequency[:intensity[:width]]</c>, e.g. <c>"0 GHz:1, 3.2 GHz:0.5, 7.9 GHz:0.3:5 MHz"</c>. The intensity is relative
/// (default 1), the width an intrinsic Lorentzian FWHM (default 0).
/// </summary>
internal static class LineList
{
    /// <summary>The syntax as help texts show it.</summary>
    public const string Syntax = "\"f[:i[:w]], ...\"";

    /// <summary>An example for messages and help.</summary>
    public const string Example = "0 GHz:1, 3.2 GHz:0.5, 7.9 GHz:0.3:5 MHz";

    /// <summary>Parses the entries; the problem names the entry at fault and what to write instead.</summary>
    public static bool TryParse(string text, out IReadOnlyList<SimulatedLine> lines, out string problem)
    {
        var list = new List<SimulatedLine>();
        lines = list;
        problem = "";
        foreach (var raw in text.Split(','))
        {
            var item = raw.Trim();
            if (!TryParseEntry(item, out var line, out problem))
            {
                problem = $"entry \"{InputException.Clip(item)}\": {problem}";
                return false;
            }

            list.Add(line);
        }

        return true;
    }

    private static bool TryParseEntry(string item, out SimulatedLine line, out string problem)
    {
        line = new SimulatedLine(0, 1);
        if (item.Length == 0)
        {
            problem = $"empty; write entries such as \"{Example}\"";
            return false;
        }

        if (item.Contains('@'))
        {
            problem = $"the relative intensity follows ':', not '@': write \"{item.Replace('@', ':')}\"";
            return false;
        }

        var parts = item.Split(':', StringSplitOptions.TrimEntries);
        if (parts.Length > 3)
        {
            problem = "expected frequency[:intensity[:width]]";
            return false;
        }

        if (!Quantity.TryParse(parts[0], Dimension.Frequency, out var hz, out problem)) return false;
        var intensity = 1.0;
        if (parts.Length > 1 && (!double.TryParse(parts[1], NumberStyles.Float, CultureInfo.InvariantCulture, out intensity) || !(intensity > 0) || !double.IsFinite(intensity)))
        {
            problem = "the intensity after ':' must be a positive number";
            return false;
        }

        var width = 0.0;
        if (parts.Length > 2)
        {
            if (!Quantity.TryParse(parts[2], Dimension.Frequency, out width, out problem)) return false;
            if (width < 0)
            {
                problem = "the width must not be negative";
                return false;
            }
        }

        line = new SimulatedLine(hz, intensity, width);
        problem = "";
        return true;
    }
}
