using System.CommandLine;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Pipeline.Batch;
using OrderUnfold.Plotting;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold track DIR</c>: lines and modes through a time-ordered batch.</summary>
internal sealed class TrackCommand : VerbCommand
{
    private readonly Argument<string> _folder = PathArgument("DIR", "the output folder of a batch");
    private readonly Option<string?> _out = SharedOptions.Out("DIR/track");
    private readonly Option<double?> _tolerance = ValueOptions.Quantity("--tolerance", Dimension.Frequency, "FREQ",
        "lines of consecutive items closer than this (or 3 × their uncertainty) are one track (default 20 MHz)", positive: true);
    private readonly Option<TrackFrame?> _frame = ValueOptions.Choice("--frame",
        "scan: on the first sweep's calibrated scan axis (default); anchor: relative to each item's strongest line",
        ("scan", TrackFrame.Scan), ("anchor", TrackFrame.Anchor));
    private readonly Option<int?> _maxGap = ValueOptions.WholeNumber("--max-gap", "N", "a track missing from more than N consecutive items ends (default 10)", min: 0);
    private readonly Option<bool> _noPlots = SharedOptions.NoPlots("do not draw track.png and smsr.png");

    public TrackCommand(CliContext cli) : base("track", "follow lines through a time-ordered batch: drift, mode hops, SMSR over time", cli)
    {
        Add(_folder);
        AddOptions([_out, _tolerance, _frame, _maxGap, _noPlots]);
    }

    public override string Details => """
        Reads DIR/summary.csv and each finished item's lines.csv, orders the items by their time stamps,
        and links the lines of consecutive items into tracks. Writes into the output folder:
          track.csv    every line of every item with its track number
          tracks.csv   per track: points, mean frequency, drift (least-squares slope, Hz/s) and its σ
          hops.csv     mode hops: the strongest line changed track between two items
          series.csv   per item: lines, strongest line, side-mode suppression, hop flag
          track.png    frequency against time, coloured by intensity (dB); smsr.png
        --frame scan places each item's lines on the first sweep's calibrated scan axis (strongest_line_hz of
        the summary), so drift and hops of the laser show; this needs one shared calibration and a stable
        cavity. --frame anchor shows drift of the spacings only. With one cavity, frequencies are known
        modulo its FSR.
        """;

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        var dir = parse.GetValue(_folder)!;
        var options = new TrackOptions
        {
            ToleranceHz = parse.GetValue(_tolerance) ?? 20e6,
            Frame = parse.GetValue(_frame) ?? TrackFrame.Scan,
            MaxGap = parse.GetValue(_maxGap) ?? 10,
            Figures = parse.GetValue(_noPlots) ? null : new FigureWriter(),
        };
        TrackResult r;
        string outputs;
        using (var staged = Io.StagedFolder.Create(parse.GetValue(_out) ?? Path.Combine(dir, "track"))) // complete or absent
        {
            r = LineTracker.Run(dir, staged.Path, options, cancellationToken);
            outputs = staged.Target;
            staged.Publish("series.csv", cancellationToken);
        }

        foreach (var w in r.Warnings) Error.WriteLine($"warning: {w}");
        Out.WriteLine($"{r.Series.Count} item(s) tracked; {r.Tracks.Count} track(s); {r.Hops.Count} mode hop(s)");
        Out.WriteLine("  track  points   mean frequency     drift");
        foreach (var t in r.Tracks.Where(t => t.Points >= 3).OrderByDescending(t => t.Points).Take(12).OrderBy(t => t.Track))
        {
            var drift = t.DriftHzPerS is double d ? $"{Quantity.FormatFrequency(d, 3)}/s ± {Quantity.FormatFrequency(t.DriftSigmaHzPerS ?? 0, 2)}/s" : "n/a";
            Out.WriteLine($"  {t.Track,5}  {t.Points,6}   {Quantity.FormatFrequency(t.MeanFrequencyHz, 6),-17}  {drift}");
        }

        foreach (var h in r.Hops.Take(20))
            Out.WriteLine($"  mode hop between {h.FromId} and {h.ToId}: strongest line moved {Quantity.FormatFrequency(h.JumpHz, 4)} (track {h.FromTrack} → {h.ToTrack})");
        if (r.Hops.Count > 20) Out.WriteLine($"  ... {r.Hops.Count - 20} more in hops.csv");
        Out.WriteLine($"outputs: {outputs}");
        return ExitCodes.Ok;
    }
}
