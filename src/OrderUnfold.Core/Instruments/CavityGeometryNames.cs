namespace OrderUnfold.Instruments;

/// <summary>
/// The names a user writes for each <see cref="CavityGeometry"/> — in setup files, command options and written setups —
/// in one table: the setup reader and writer and the commands take them from here, and docs/setup.md lists them.
/// </summary>
public static class CavityGeometryNames
{
    /// <summary>Name → geometry (case-insensitive).</summary>
    public static IReadOnlyDictionary<string, CavityGeometry> ByName { get; } = new Dictionary<string, CavityGeometry>(StringComparer.OrdinalIgnoreCase)
    {
        ["planar"] = CavityGeometry.Planar,
        ["confocal"] = CavityGeometry.Confocal,
    };

    /// <summary>The accepted names in words, for messages ("planar or confocal").</summary>
    public static string Choices => string.Join(" or ", ByName.Keys);

    /// <summary>The name of <paramref name="geometry"/>.</summary>
    public static string NameOf(CavityGeometry geometry) => ByName.First(kv => kv.Value == geometry).Key;

    /// <summary>The geometry named <paramref name="name"/> (surrounding spaces and case ignored); false for any other name.</summary>
    public static bool TryParse(string? name, out CavityGeometry geometry) => ByName.TryGetValue(name?.Trim() ?? "", out geometry);
}
