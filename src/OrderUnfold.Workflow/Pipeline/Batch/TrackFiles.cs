using CsvHelper;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>The first three columns of track.csv and series.csv: when the item was taken and which it is.</summary>
public abstract record ItemTime
{
    /// <summary>Seconds since the first item (or the item's index when no item has a time stamp).</summary>
    [CsvColumn("time_s"), CsvConverter(typeof(NumberCell))]
    public double TimeS { get; init; }

    /// <summary>UTC time stamp of <see cref="TimeS"/> (the item's, from the summary), or null when the items have none.</summary>
    [CsvColumn("timestamp"), CsvConverter(typeof(OptionalTextCell))]
    public string? Timestamp { get; init; }

    /// <summary>Item id.</summary>
    [CsvColumn("id"), CsvConverter(typeof(TextCell))]
    public string Id { get; init; } = "";
}

/// <summary>One line of one item, placed on a track: a row of track.csv.</summary>
[CsvRecord]
public sealed partial record TrackPoint : ItemTime
{
    /// <summary>Track number (1-based).</summary>
    [CsvColumn("track"), CsvConverter(typeof(WholeNumberCell<int>))]
    public int Track { get; init; }

    /// <summary>Position in the chosen frame, Hz.</summary>
    [CsvColumn("frequency_hz"), CsvConverter(typeof(NumberCell))]
    public double FrequencyHz { get; init; }

    /// <summary>Frequency uncertainty from lines.csv, Hz, when given.</summary>
    [CsvColumn("frequency_sigma_hz"), CsvConverter(typeof(NumberCell))]
    public double? SigmaHz { get; init; }

    /// <summary>Line intensity from lines.csv.</summary>
    [CsvColumn("intensity"), CsvConverter(typeof(NumberCell))]
    public double Intensity { get; init; }

    /// <summary>10·log₁₀(intensity), or null for an intensity that is not positive.</summary>
    [CsvColumn("intensity_db"), CsvConverter(typeof(NumberCell))]
    public double? IntensityDb { get; init; }

    /// <summary>True for the item's strongest line.</summary>
    [CsvColumn("strongest"), CsvConverter(typeof(TrueFalseCell))]
    public bool Strongest { get; init; }
}

/// <summary>One track: a line followed through the items, with its drift (least-squares slope of frequency on time). A row of tracks.csv.</summary>
[CsvRecord]
public sealed partial record TrackSummary
{
    /// <summary>Track number (1-based).</summary>
    [CsvColumn("track"), CsvConverter(typeof(WholeNumberCell<int>))]
    public int Track { get; init; }

    /// <summary>Lines on the track.</summary>
    [CsvColumn("points"), CsvConverter(typeof(WholeNumberCell<int>))]
    public int Points { get; init; }

    /// <summary>Time of its first line, s.</summary>
    [CsvColumn("first_time_s"), CsvConverter(typeof(NumberCell))]
    public double FirstTimeS { get; init; }

    /// <summary>Time of its last line, s.</summary>
    [CsvColumn("last_time_s"), CsvConverter(typeof(NumberCell))]
    public double LastTimeS { get; init; }

    /// <summary>Mean position, Hz.</summary>
    [CsvColumn("mean_frequency_hz"), CsvConverter(typeof(NumberCell))]
    public double MeanFrequencyHz { get; init; }

    /// <summary>Least-squares slope of frequency on time, Hz/s (three or more points).</summary>
    [CsvColumn("drift_hz_per_s"), CsvConverter(typeof(NumberCell))]
    public double? DriftHzPerS { get; init; }

    /// <summary>Standard error of the slope, Hz/s.</summary>
    [CsvColumn("drift_sigma_hz_per_s"), CsvConverter(typeof(NumberCell))]
    public double? DriftSigmaHzPerS { get; init; }

    /// <summary>Mean intensity of its lines.</summary>
    [CsvColumn("mean_intensity"), CsvConverter(typeof(NumberCell))]
    public double MeanIntensity { get; init; }
}

/// <summary>A mode hop: the strongest line moved to another track between two consecutive items. A row of hops.csv.</summary>
[CsvRecord]
public sealed partial record ModeHop
{
    /// <summary>Time of the item after the hop, s.</summary>
    [CsvColumn("time_s"), CsvConverter(typeof(NumberCell))]
    public double TimeS { get; init; }

    /// <summary>UTC time stamp of <see cref="TimeS"/>, or null.</summary>
    [CsvColumn("timestamp"), CsvConverter(typeof(OptionalTextCell))]
    public string? Timestamp { get; init; }

    /// <summary>Item before the hop.</summary>
    [CsvColumn("from_id"), CsvConverter(typeof(TextCell))]
    public string FromId { get; init; } = "";

    /// <summary>Item after the hop.</summary>
    [CsvColumn("to_id"), CsvConverter(typeof(TextCell))]
    public string ToId { get; init; } = "";

    /// <summary>How far the strongest line moved, Hz (folded into ±FSR/2 for one cavity).</summary>
    [CsvColumn("jump_hz"), CsvConverter(typeof(NumberCell))]
    public double JumpHz { get; init; }

    /// <summary>Track of the strongest line before.</summary>
    [CsvColumn("from_track"), CsvConverter(typeof(WholeNumberCell<int>))]
    public int FromTrack { get; init; }

    /// <summary>Track of the strongest line after.</summary>
    [CsvColumn("to_track"), CsvConverter(typeof(WholeNumberCell<int>))]
    public int ToTrack { get; init; }
}

/// <summary>Where an item's side-mode suppression came from.</summary>
public enum SmsrSource
{
    /// <summary>The summary's smsr_db (the item's mode analysis).</summary>
    Summary,

    /// <summary>Strongest over second-strongest line of lines.csv.</summary>
    Lines,
}

/// <summary>Per-item values over time: a row of series.csv.</summary>
[CsvRecord]
public sealed partial record SeriesPoint : ItemTime
{
    /// <summary>Lines of the item.</summary>
    [CsvColumn("lines"), CsvConverter(typeof(WholeNumberCell<int>))]
    public int Lines { get; init; }

    /// <summary>Position of the strongest line in the chosen frame, Hz.</summary>
    [CsvColumn("strongest_hz"), CsvConverter(typeof(NumberCell))]
    public double? StrongestHz { get; init; }

    /// <summary>Side-mode suppression, dB: the summary's smsr_db when given, else strongest over second-strongest line.</summary>
    [CsvColumn("smsr_db"), CsvConverter(typeof(NumberCell))]
    public double? SmsrDb { get; init; }

    /// <summary>Where <see cref="SmsrDb"/> came from (null when there is none).</summary>
    [CsvColumn("smsr_source"), CsvConverter(typeof(LowerCaseCell<SmsrSource>))]
    public SmsrSource? SmsrSource { get; init; }

    /// <summary>Mode spacing from the summary, Hz.</summary>
    [CsvColumn("mode_spacing_hz"), CsvConverter(typeof(NumberCell))]
    public double? ModeSpacingHz { get; init; }

    /// <summary>True when the strongest line changed track at this item.</summary>
    [CsvColumn("hop"), CsvConverter(typeof(TrueFalseCell))]
    public bool Hop { get; init; }

    /// <summary>True when <see cref="SmsrDb"/> came from the summary's mode analysis.</summary>
    public bool SmsrFromSummary => SmsrSource == Batch.SmsrSource.Summary;
}

/// <summary>The columns of an item's lines.csv that tracking reads (other columns are ignored).</summary>
[CsvRecord]
internal sealed partial record ItemLine
{
    [CsvColumn("frequency_hz"), CsvConverter(typeof(NumberCell))]
    public double FrequencyHz { get; init; }

    [CsvColumn("frequency_sigma_hz", Optional = true), CsvConverter(typeof(NumberCell))]
    public double? SigmaHz { get; init; }

    [CsvColumn("intensity"), CsvConverter(typeof(NumberCell))]
    public double Intensity { get; init; }
}

/// <summary>Writes the track files (track.csv, tracks.csv, hops.csv, series.csv) and reads an item's lines.</summary>
public static class TrackFiles
{
    /// <summary>The file names, in the order they are written.</summary>
    public static IReadOnlyList<string> Names { get; } = ["track.csv", "tracks.csv", "hops.csv", "series.csv"];

    /// <summary>Writes the four tables into <paramref name="outDir"/> (each atomically); returns their paths.</summary>
    public static List<string> Write(string outDir, IReadOnlyList<TrackPoint> points, IReadOnlyList<TrackSummary> tracks, IReadOnlyList<ModeHop> hops,
        IReadOnlyList<SeriesPoint> series)
    {
        var paths = Names.Select(n => Path.Combine(outDir, n)).ToList();
        CsvTable.WriteFile(paths[0], points);
        CsvTable.WriteFile(paths[1], tracks);
        CsvTable.WriteFile(paths[2], hops);
        CsvTable.WriteFile(paths[3], series);
        return paths;
    }

    /// <summary>
    /// The lines of an item's lines.csv (frequency, its σ when given, intensity), or null when the file is missing or
    /// unreadable. lines.csv is written by the unfold's outputs; this is the one place tracking reads it.
    /// </summary>
    internal static List<ItemLine>? ReadItemLines(string path)
    {
        if (!File.Exists(path)) return null;
        try
        {
            return CsvTable.ReadColumns<ItemLine>(path, "line list").ToList();
        }
        catch (InputException)
        {
            return null;
        }
    }
}
