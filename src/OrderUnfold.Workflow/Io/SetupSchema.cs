namespace OrderUnfold.Io;

/// <summary>
/// Names of the tables and keys a setup file may hold. The reader rejects anything else; the writer,
/// the template and the documentation test use the same lists, so they cannot drift apart.
/// </summary>
public static class SetupSchema
{
    /// <summary>Array of tables, one per cavity.</summary>
    public const string InstrumentTable = "instrument";

    /// <summary>Array of tables, one per measured source file.</summary>
    public const string SweepTable = "sweep";

    /// <summary>Array of tables, at most one per instrument.</summary>
    public const string CalibrationTable = "calibration";

    /// <summary>Single table with the inversion options.</summary>
    public const string SolveTable = "solve";

    /// <summary>Keys of an [[instrument]] table.</summary>
    public static IReadOnlyList<string> InstrumentKeys { get; } =
    [
        "name", "geometry", "length", "fsr", "refractive_index", "finesse", "reflectance", "mirror_loss", "fix_finesse",
        "mirror_radius", "mirror_radius_2",
    ];

    /// <summary>Keys that say how to read one delimited-text file (shared by [[sweep]] and [[calibration]]).</summary>
    public static IReadOnlyList<string> FileKeys { get; } =
    [
        "file", "x_column", "y_column", "ramp_column", "scan", "sample_interval", "delimiter", "decimal", "header", "directions",
        "ramp_file", "ramp_time_column", "ramp_value_column",
    ];

    /// <summary>Keys of a [[sweep]] table.</summary>
    public static IReadOnlyList<string> SweepKeys { get; } = ["instrument", .. FileKeys];

    /// <summary>Keys of a [[calibration]] table.</summary>
    public static IReadOnlyList<string> CalibrationKeys { get; } = ["instrument", .. FileKeys, "wavelength", "axis_degree"];

    /// <summary>Keys of the [solve] table.</summary>
    public static IReadOnlyList<string> SolveKeys { get; } =
    [
        "window", "grid_step", "sparsity", "smoothness", "anchor_frequency", "min_snr", "source_wavelength",
        "refine", "fit_widths", "bootstrap", "doubtful_delta_chi2",
        "self_calibrate", "known_interval", "refine_fsr", "solver", "max_memory_gb",
    ];

    /// <summary>Largest polynomial degree accepted for a sweep axis.</summary>
    public const int MaxAxisDegree = 7;

    /// <summary>Every table name with the brackets it is written with, for messages.</summary>
    internal static readonly (string Name, bool IsArray)[] Tables =
    [
        (InstrumentTable, true), (SweepTable, true), (CalibrationTable, true), (SolveTable, false),
    ];

    /// <summary>The table name written as in a file: <c>[[sweep]]</c> or <c>[solve]</c>.</summary>
    internal static string Bracketed(string name, bool isArray) => isArray ? $"[[{name}]]" : $"[{name}]";

    /// <summary>Accepted keys of a known table.</summary>
    internal static IReadOnlyList<string> KeysOf(string table) => table switch
    {
        InstrumentTable => InstrumentKeys,
        SweepTable => SweepKeys,
        CalibrationTable => CalibrationKeys,
        SolveTable => SolveKeys,
        _ => throw new ArgumentOutOfRangeException(nameof(table), table, "not a setup table"),
    };

    /// <summary>
    /// The candidate closest to <paramref name="given"/> when it is near enough to be a likely typo
    /// (edit distance with transpositions, ignoring case and '-' versus '_'); otherwise null.
    /// </summary>
    internal static string? Closest(string given, IEnumerable<string> candidates)
    {
        var g = Normalise(given);
        string? best = null;
        var bestDistance = int.MaxValue;
        foreach (var c in candidates)
        {
            var d = EditDistance(g, Normalise(c));
            if (d < bestDistance)
            {
                bestDistance = d;
                best = c;
            }
        }

        if (best is null) return null;
        var allowed = Math.Min(3, Math.Max(1, Math.Min(g.Length, best.Length) / 3));
        return bestDistance <= allowed ? best : null;
    }

    private static string Normalise(string s) => s.Trim().ToLowerInvariant().Replace('-', '_').Replace(' ', '_');

    /// <summary>Optimal-string-alignment distance: insertions, deletions, substitutions and adjacent swaps cost 1.</summary>
    internal static int EditDistance(string a, string b)
    {
        var d = new int[a.Length + 1, b.Length + 1];
        for (var i = 0; i <= a.Length; i++) d[i, 0] = i;
        for (var j = 0; j <= b.Length; j++) d[0, j] = j;
        for (var i = 1; i <= a.Length; i++)
        {
            for (var j = 1; j <= b.Length; j++)
            {
                var cost = a[i - 1] == b[j - 1] ? 0 : 1;
                var v = Math.Min(Math.Min(d[i - 1, j] + 1, d[i, j - 1] + 1), d[i - 1, j - 1] + cost);
                if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1]) v = Math.Min(v, d[i - 2, j - 2] + 1);
                d[i, j] = v;
            }
        }

        return d[a.Length, b.Length];
    }
}
