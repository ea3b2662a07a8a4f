using OrderUnfold.Io;
using OrderUnfold.Outputs;

namespace OrderUnfold.Analysis.Modes;

/// <summary>
/// Writes a mode analysis as <c>modes.json</c> (<see cref="ModesReport"/>: everything, field names carry their units) and
/// <c>modes.csv</c> (<see cref="ModeRow"/>: one row per line). Both are written atomically (<see cref="AtomicFile"/>).
/// </summary>
public static class ModeOutputs
{
    /// <summary>File name of the JSON report.</summary>
    public const string JsonFileName = "modes.json";

    /// <summary>File name of the per-line table.</summary>
    public const string CsvFileName = "modes.csv";

    /// <summary>File name of the web page (modes.html, not report.html: the modes files usually share the folder of the
    /// unfold they read, whose report.html they must not replace).</summary>
    public const string HtmlFileName = "modes.html";

    /// <summary>File name of the plot.</summary>
    public const string PngFileName = "modes.png";

    /// <summary>Header of <c>modes.csv</c>.</summary>
    public static IReadOnlyList<string> CsvColumns => new ModeRowColumns().Names;

    /// <summary>Writes <c>modes.json</c> to <paramref name="path"/>; <paramref name="verdict"/> is included when given.</summary>
    public static void WriteJson(string path, ModeAnalysis analysis, ModeVerdict? verdict = null, string? source = null) =>
        AtomicFile.WriteAllText(path, JsonText(analysis, verdict, source));

    /// <summary>Writes <c>modes.csv</c> to <paramref name="path"/>.</summary>
    public static void WriteCsv(string path, ModeAnalysis analysis) => AtomicFile.WriteAllText(path, CsvText(analysis));

    /// <summary>
    /// The table: main-comb modes by k, then second-family lines, off-comb lines and excluded lines by frequency.
    /// <c>intensity_db</c> is 10·log10(intensity / strongest) with its sigma; <c>read_frequency_hz</c> is the
    /// frequency as read (unfolded under the chosen spacing when folded); empty cells mean "not known".
    /// </summary>
    public static string CsvText(ModeAnalysis analysis) => OutputCsv.Write(ModesReportBuilder.Rows(analysis), new ModeRowColumns());

    /// <summary>The JSON report as text.</summary>
    public static string JsonText(ModeAnalysis analysis, ModeVerdict? verdict = null, string? source = null) =>
        OutputJson.Serialize(ModesReportBuilder.Build(analysis, verdict, source), c => c.ModesReport);

    /// <summary>Name of a role in the output files.</summary>
    public static string RoleName(LineRole role) => ModesReportBuilder.RoleName(role);
}
