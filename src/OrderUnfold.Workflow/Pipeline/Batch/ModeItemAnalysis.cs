using System.Globalization;
using OrderUnfold.Analysis.Modes;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>
/// Fills the summary's mode_spacing_hz and smsr_db columns from the laser-mode analysis of each item
/// (<see cref="LaserModes.Analyse"/> on the item's line list). A failed mode analysis leaves the columns empty:
/// a line list that is not a comb is not an item failure.
/// </summary>
public sealed class ModeItemAnalysis : IItemAnalysis
{
    public static ModeItemAnalysis Instance { get; } = new();

    public string Identity => "laser-modes v1 (default options)";

    public IReadOnlyDictionary<string, string> Analyse(UnfoldRun run)
    {
        var values = new Dictionary<string, string>();
        if (run.Result.Lines.Count == 0) return values;
        ModeAnalysis analysis;
        try
        {
            analysis = LaserModes.Analyse(ModeInputs.FromRun(run));
        }
        catch (InputException)
        {
            return values;
        }

        if (analysis.Spacing is { } sp && double.IsFinite(sp.SpacingHz))
            values["mode_spacing_hz"] = sp.SpacingHz.ToString("R", CultureInfo.InvariantCulture);
        if (analysis.Smsr.ValueDb is double db && double.IsFinite(db))
            values["smsr_db"] = db.ToString("R", CultureInfo.InvariantCulture);
        return values;
    }
}
