namespace OrderUnfold.Pipeline.Batch;

/// <summary>
/// Extra per-item numbers for the summary, computed from a finished unfold (e.g. laser mode spacing and
/// side-mode suppression). Keys are summary column names; the summary shows <see cref="SummaryTable.ModeSpacingColumn"/>
/// and <see cref="SummaryTable.SmsrColumn"/>, and every key is kept in the item's done.json.
/// </summary>
public interface IItemAnalysis
{
    /// <summary>Names this analysis and its settings; it enters each item's key, so changing it re-runs finished items.</summary>
    string Identity { get; }

    /// <summary>Values by column name (invariant-culture text; an absent key leaves the column empty).</summary>
    IReadOnlyDictionary<string, string> Analyse(UnfoldRun run);
}

/// <summary>No mode analysis: mode_spacing_hz and smsr_db stay empty (the default is <see cref="ModeItemAnalysis"/>).</summary>
public sealed class NoItemAnalysis : IItemAnalysis
{
    public static NoItemAnalysis Instance { get; } = new();

    public string Identity => "none";

    public IReadOnlyDictionary<string, string> Analyse(UnfoldRun run) => new Dictionary<string, string>();
}
