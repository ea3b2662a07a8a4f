using OrderUnfold.Plotting;
using OrderUnfold.Pipeline.Batch;
using OrderUnfold.Units;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold track DIR</c>: lines and modes through a time-ordered batch.</summary>
public sealed class TrackCommand : ICommand
{
    public string Name => "track";
    public string Summary => "follow lines through a time-ordered batch: drift, mode hops, SMSR over time";

    public string Usage => """
        orderunfold track DIR [--out DIR/track] [--tolerance "20 MHz"] [--frame scan|anchor] [--max-gap 10] [--no-plots]

        Reads DIR/summary.csv and each finished item's lines.csv, orders the items by their time stamps,
        and links the lines of consecutive items that lie within the tolerance (or 3 × their frequency
        uncertainty, when larger) into tracks. Writes into --out:
          track.csv    every line of every item with its track number
          tracks.csv   per track: points, mean frequency, drift (least-squares slope, Hz/s) and its σ
          hops.csv     mode hops: the strongest line changed track between two items
          series.csv   per item: lines, strongest line, side-mode suppression, hop flag
          track.png    frequency against time, coloured by intensity (dB); smsr.png
        --frame scan (default) places each item's lines on the first sweep's calibrated scan axis
        (strongest_line_hz of the summary), so drift and hops of the laser show; this needs one shared
        calibration and a stable cavity. --frame anchor keeps frequencies relative to each item's strongest
        line (drift of the spacings only). With one cavity, frequencies are known modulo its FSR.
        """;

    public int Run(string[] args, TextWriter stdout, TextWriter stderr)
    {
        var a = new Args(Name, args, ["out", "tolerance", "frame", "max-gap"], ["no-plots"]);
        var dir = a.Positional(0, "DIR (the output folder of a batch)");
        a.NoMorePositionals(1);
        var frame = (a.Value("frame") ?? "scan").ToLowerInvariant() switch
        {
            "scan" => TrackFrame.Scan,
            "anchor" => TrackFrame.Anchor,
            var f => throw new UsageException($"track: --frame expects scan or anchor but got '{f}'"),
        };
        var tolerance = a.Quantity("tolerance", Dimension.Frequency) ?? 20e6;
        if (!(tolerance > 0)) throw new UsageException($"track: --tolerance must be a positive frequency but got '{a.Value("tolerance")}'");
        var options = new TrackOptions { ToleranceHz = tolerance, Frame = frame, MaxGap = a.Int("max-gap", 0) ?? 10, Figures = a.Flag("no-plots") ? null : new FigureWriter() };
        TrackResult r;
        string outputs;
        using (var staged = Io.StagedFolder.Create(a.Value("out") ?? Path.Combine(dir, "track"))) // complete or absent
        {
            r = LineTracker.Run(dir, staged.Path, options);
            outputs = staged.Target;
            staged.Publish("series.csv");
        }

        foreach (var w in r.Warnings) stderr.WriteLine($"warning: {w}");
        stdout.WriteLine($"{r.Series.Count} item(s) tracked; {r.Tracks.Count} track(s); {r.Hops.Count} mode hop(s)");
        stdout.WriteLine("  track  points   mean frequency     drift");
        foreach (var t in r.Tracks.Where(t => t.Points >= 3).OrderByDescending(t => t.Points).Take(12).OrderBy(t => t.Track))
        {
            var drift = t.DriftHzPerS is double d ? $"{Quantity.FormatFrequency(d, 3)}/s ± {Quantity.FormatFrequency(t.DriftSigmaHzPerS ?? 0, 2)}/s" : "n/a";
            stdout.WriteLine($"  {t.Track,5}  {t.Points,6}   {Quantity.FormatFrequency(t.MeanFrequencyHz, 6),-17}  {drift}");
        }

        foreach (var h in r.Hops.Take(20))
            stdout.WriteLine($"  mode hop between {h.FromId} and {h.ToId}: strongest line moved {Quantity.FormatFrequency(h.JumpHz, 4)} (track {h.FromTrack} → {h.ToTrack})");
        if (r.Hops.Count > 20) stdout.WriteLine($"  ... {r.Hops.Count - 20} more in hops.csv");
        stdout.WriteLine($"outputs: {outputs}");
        return ExitCodes.Ok;
    }
}
