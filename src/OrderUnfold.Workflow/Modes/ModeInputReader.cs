using System.Globalization;
using OrderUnfold.Io;
using OrderUnfold.Outputs;

namespace OrderUnfold.Analysis.Modes;

/// <summary>
/// Reads the mode analysis input from a result folder: <c>lines.csv</c> (required) and <c>report.json</c>
/// (optional). Every problem is an <see cref="InputException"/> with the file, line and column.
/// <para>
/// <c>lines.csv</c>: comma separated, a header row, then one row per line. Columns are found by their header
/// name (case-insensitive, in any order; other columns are ignored): <c>frequency_hz</c> and
/// <c>intensity</c> are required, <c>frequency_sigma_hz</c>, <c>intensity_sigma</c> and <c>snr</c> are
/// optional and may hold empty cells. Numbers use a decimal point.
/// </para>
/// <para>
/// <c>report.json</c>: read into <see cref="UnfoldReport"/>, the record the unfold writes it from (a value of the wrong type
/// anywhere is an error; unknown fields are ignored); of it this analysis uses <c>detection_limit</c> (number),
/// <c>orders_resolved</c> (true/false, default true), <c>folding_fsr_hz</c> (number) and <c>anchor_frequency_hz</c>
/// (number), each when present (null counts as absent).
/// </para>
/// </summary>
public static class ModeInputReader
{
    /// <summary>Name of the line list inside a result folder.</summary>
    public const string LinesFileName = "lines.csv";

    /// <summary>Name of the run report inside a result folder.</summary>
    public const string ReportFileName = "report.json";

    private static readonly string[] Required = ["frequency_hz", "intensity"];
    private static readonly string[] Optional = ["frequency_sigma_hz", "intensity_sigma", "snr"];

    /// <summary>Reads <c>DIR/lines.csv</c> and, when present, <c>DIR/report.json</c>.</summary>
    public static ModeInput FromResultDirectory(string dir)
    {
        ArgumentException.ThrowIfNullOrWhiteSpace(dir);
        if (!Directory.Exists(dir))
            throw new InputException("the result folder does not exist", dir);
        var linesPath = Path.Combine(dir, LinesFileName);
        if (!File.Exists(linesPath))
            throw new InputException($"no {LinesFileName} in the result folder; run '{Hint.Command("unfold SETUP --out " + Hint.Quote(dir))}' first", dir);

        var linesText = InputLimits.ReadAllText(linesPath, LinesFileName);
        var reportPath = Path.Combine(dir, ReportFileName);
        // lines.csv written by an unfold (it has the "order_verdict" column, "order" before schema 2) without its report.json is the output of a run that
        // did not finish: whether its orders are resolved is unknown, so no spacing is reported from it
        if (!File.Exists(reportPath) && linesText.Split('\n', 2)[0].Split(',').Any(h => h.Trim() is "order_verdict" or "order"))
            throw new InputException($"{LinesFileName} has no {ReportFileName} beside it: the unfold that wrote this folder did not finish, so whether its orders are resolved is unknown; run the unfold again", dir);
        var lines = ReadLines(linesPath, linesText);
        var report = File.Exists(reportPath) ? ReadReport(reportPath, System.Text.Encoding.UTF8.GetBytes(InputLimits.ReadAllText(reportPath, ReportFileName))) : new ReportFields();

        var input = new ModeInput(lines, report.DetectionLimit, report.OrdersResolved ?? true, report.FoldingFsrHz, report.AnchorHz);
        if (!input.OrdersResolved && input.FoldingFsrHz is null)
            throw new InputException("\"orders_resolved\" is false but there is no \"folding_fsr_hz\": the folded positions cannot be read",
                reportPath, report.OrdersResolvedAt?.Line, report.OrdersResolvedAt?.Column);
        try
        {
            input.Validate();
        }
        catch (InputException e)
        {
            throw e.At(linesPath);
        }

        return input;
    }

    /// <summary>Parses the text of a line list; <paramref name="file"/> names it in messages.</summary>
    public static IReadOnlyList<ModeInputLine> ReadLines(string file, string text)
    {
        if (text.Trim().Length == 0) throw new InputException("the file is empty; expected a header row with frequency_hz and intensity", file, 1);

        List<TextRow> rows;
        try
        {
            rows = DelimitedText.Rows(text, ',').Where(r => !r.IsBlank).ToList();
        }
        catch (Exception e) when (e is not InputException)
        {
            throw new InputException($"cannot split the file into comma-separated fields: {e.Message}", file, inner: e);
        }

        var header = rows[0];
        var columns = new Dictionary<string, int>(StringComparer.OrdinalIgnoreCase);
        for (var i = 0; i < header.Fields.Length; i++)
        {
            var name = header.Fields[i].Trim();
            if (name.Length == 0) continue;
            if (!columns.TryAdd(name, i) && (Required.Contains(name, StringComparer.OrdinalIgnoreCase) || Optional.Contains(name, StringComparer.OrdinalIgnoreCase)))
                throw new InputException($"column \"{name}\" appears twice in the header", file, header.Line, i + 1);
        }

        foreach (var r in Required)
        {
            if (!columns.ContainsKey(r))
                throw new InputException(
                    $"the header needs a column \"{r}\" but has: {string.Join(", ", header.Fields.Select(f => $"\"{f}\""))}",
                    file, header.Line, 1);
        }

        var result = new List<ModeInputLine>();
        foreach (var row in rows.Skip(1))
        {
            var f = Cell(row, columns, "frequency_hz", required: true, file)!.Value;
            var intensity = Cell(row, columns, "intensity", required: true, file)!.Value;
            var fs = Cell(row, columns, "frequency_sigma_hz", required: false, file);
            var isg = Cell(row, columns, "intensity_sigma", required: false, file);
            var snr = Cell(row, columns, "snr", required: false, file);
            CheckNonNegative(fs, row, columns, "frequency_sigma_hz", file);
            CheckNonNegative(isg, row, columns, "intensity_sigma", file);
            result.Add(new ModeInputLine(f, fs, intensity, isg, snr));
        }

        if (result.Count == 0)
            throw new InputException("the file has a header but no lines below it", file, header.Line);
        return result;
    }

    private static double? Cell(TextRow row, Dictionary<string, int> columns, string name, bool required, string file)
    {
        if (!columns.TryGetValue(name, out var index)) return null;
        var text = index < row.Fields.Length ? row.Fields[index] : "";
        if (text.Length == 0)
        {
            if (required) throw new InputException($"expected a number in column {index + 1} (\"{name}\") but the cell is empty", file, row.Line, index + 1);
            return null;
        }

        if (!double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out var v) || !double.IsFinite(v))
            throw new InputException($"expected a finite number in column {index + 1} (\"{name}\") but got \"{text}\"", file, row.Line, index + 1);
        return v;
    }

    private static void CheckNonNegative(double? v, TextRow row, Dictionary<string, int> columns, string name, string file)
    {
        if (v is { } x && x < 0)
            throw new InputException($"an uncertainty cannot be negative: column {columns[name] + 1} (\"{name}\") holds {x.ToString(CultureInfo.InvariantCulture)}",
                file, row.Line, columns[name] + 1);
    }

    /// <summary>The fields of report.json this analysis uses; null when absent.</summary>
    internal sealed record ReportFields(
        double? DetectionLimit = null,
        bool? OrdersResolved = null,
        double? FoldingFsrHz = null,
        double? AnchorHz = null,
        (int Line, int Column)? OrdersResolvedAt = null);

    /// <summary>Reads the report into the <see cref="UnfoldReport"/> record (the type the unfold writes it from) and checks the
    /// fields this analysis uses; an error names the file, line and column.</summary>
    internal static ReportFields ReadReport(string file, byte[] json)
    {
        var report = OutputJson.Deserialize(file, json, c => c.UnfoldReport, "report");
        if (report.SchemaVersion > UnfoldReport.CurrentSchemaVersion)
            throw At(file, json, "schema_version",
                $"the report has schema_version {report.SchemaVersion}; this build reads up to {UnfoldReport.CurrentSchemaVersion} (it was written by a newer version)");
        if (report.DetectionLimit is { } d && !(d > 0 && d <= 1) || report.DetectionLimit is { } nd && !double.IsFinite(nd))
            throw At(file, json, "detection_limit",
                $"\"detection_limit\" is a relative intensity and must lie in (0, 1] but got {report.DetectionLimit.Value.ToString(CultureInfo.InvariantCulture)}");
        if (report.FoldingFsrHz is { } f && !(f > 0 && double.IsFinite(f)))
            throw At(file, json, "folding_fsr_hz", $"\"folding_fsr_hz\" must be a positive frequency in Hz but got {f.ToString(CultureInfo.InvariantCulture)}");
        return new ReportFields(report.DetectionLimit, report.OrdersResolved, report.FoldingFsrHz, report.AnchorFrequencyHz,
            report.OrdersResolved is null ? null : OutputJson.ValuePosition(json, "orders_resolved"));
    }

    private static InputException At(string file, byte[] json, string field, string message)
    {
        var at = OutputJson.ValuePosition(json, field);
        return new InputException(message, file, at?.Line, at?.Column);
    }
}
