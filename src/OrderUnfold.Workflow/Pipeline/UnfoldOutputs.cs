using System.Text;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Outputs;
using OrderUnfold.Reports;

namespace OrderUnfold.Pipeline;

/// <summary>Names of the files an unfold writes.</summary>
public static class OutputNames
{
    public const string Report = "report.json";
    public const string Lines = "lines.csv";
    public const string Spectrum = "spectrum.csv";
    public const string SpectrumPlot = "spectrum.png";
}

/// <summary>Writes an unfold run's report, tables and plots. Every file is written atomically.</summary>
public static class UnfoldOutputs
{
    /// <summary>Writes report.json, lines.csv, spectrum.csv, report.html and (when <paramref name="figures"/> is given) the PNGs.
    /// Returns the paths written. With <paramref name="staged"/> the directory is a staging folder that is published as a
    /// whole (the batch): the text files are written directly, and flushing them to disk is left to the publisher.</summary>
    public static IReadOnlyList<string> Write(UnfoldRun run, string directory, IFigureWriter? figures, string? toolVersion = null, bool staged = false)
    {
        Directory.CreateDirectory(directory);
        var written = new List<string>();
        void Text(string name, string content)
        {
            var p = Path.Combine(directory, name);
            AtomicFile.WriteAllText(p, content, staged);
            written.Add(p);
        }

        var report = Report(run, toolVersion);
        Text(OutputNames.Lines, LinesCsv(run, report));
        Text(OutputNames.Spectrum, SpectrumCsv(run));
        var drawn = figures?.WriteUnfold(run, directory);
        if (drawn is not null) written.AddRange(drawn.Paths);
        // the page people open: the same record as report.json, the figures inline as SVG (Reports/UnfoldHtml.cs)
        written.Add(UnfoldHtml.Write(directory, report, drawn?.Svg, staged));

        // the report last: its presence means the run's outputs are complete
        Text(OutputNames.Report, OutputJson.Serialize(report, c => c.UnfoldReport));
        return written;
    }

    /// <summary>lines.csv: one row per line, frequencies relative to the anchor (strongest line); the same values as the
    /// report's lines (<see cref="UnfoldReport.Lines"/>, columns by <see cref="LineColumns"/>).</summary>
    public static string LinesCsv(UnfoldRun run) => LinesCsv(run, Report(run));

    private static string LinesCsv(UnfoldRun run, UnfoldReport report) => OutputCsv.Write(
        report.Lines,
        new LineColumns(widths: run.Result.Lines.Any(l => l.WidthHz is not null), absolute: run.Setup.Solve.AnchorFrequencyHz is not null));

    /// <summary>
    /// The unambiguous range in one wording for the console and the plots: the window's alias-free width from the
    /// instruments' geometry (what the summary prints), and, when the refinement tested it, how far the weakest
    /// line's order is pinned at this noise (a different quantity, so it is named as such).
    /// </summary>
    public static string UnambiguousText(UnfoldRun run)
    {
        var r = run.Result;
        if (!r.OrdersResolved) return "one instrument: the spectrum is folded into one FSR; orders are unknown";
        var text = $"unambiguous range {Units.Quantity.FormatFrequency(r.UnambiguousRangeHz)} (alias margin ≥ 3 linewidths; window {Units.Quantity.FormatFrequency(r.Grid.StartHz)} to {Units.Quantity.FormatFrequency(r.Grid.EndHz)})";
        if (run.Refinement?.UnambiguousRangeHz is double noise)
            text += run.Refinement.UnambiguousRangeIsLowerBound
                ? $"; at this noise no order shift of the weakest line up to ±{Units.Quantity.FormatFrequency(noise)} fits"
                : $"; at this noise the weakest line's order is pinned against shifts up to ±{Units.Quantity.FormatFrequency(noise)}";
        return text;
    }

    /// <summary>The line's order verdict as the outputs write it: "secure", "doubtful", "unknown" (one instrument) or
    /// "unchecked" (orders resolved, no alternative placement tried); from <see cref="UnfoldResult.OrderVerdictOf"/>.</summary>
    public static string Verdict(UnfoldRun run, UnfoldedLine l) => OutputJson.Name(run.Result.OrderVerdictOf(l));

    /// <summary>spectrum.csv: the grid and the recovered intensity per bin (and the detection limit when computed).</summary>
    public static string SpectrumCsv(UnfoldRun run)
    {
        var r = run.Result;
        var limit = r.DetectionLimit;
        var rows = Enumerable.Range(0, r.Grid.Count).Select(j => new SpectrumRow(r.Grid[j], r.Spectrum[j], limit?[j]));
        return OutputCsv.Write(rows, new SpectrumRowColumns(detectionLimit: limit is not null));
    }

    /// <summary>The report.json record of a run.</summary>
    public static UnfoldReport Report(UnfoldRun run, string? toolVersion = null) => UnfoldReportBuilder.Build(run, toolVersion);

    public static string Slug(string name)
    {
        var sb = new StringBuilder();
        foreach (var ch in name.ToLowerInvariant())
        {
            if (char.IsLetterOrDigit(ch)) sb.Append(ch);
            else if (sb.Length > 0 && sb[^1] != '-') sb.Append('-');
        }

        return sb.ToString().Trim('-');
    }
}
