using System.Globalization;
using System.Text;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>Which frame the tracked frequencies are given in.</summary>
public enum TrackFrame
{
    /// <summary>
    /// The first sweep's calibrated scan axis: each item's lines are placed at (frequency relative to the strongest
    /// line) + (the strongest line's scan position, <c>strongest_line_hz</c>), unwrapped from item to item. With one
    /// shared calibration and a stable cavity, laser drift and mode hops show as real movements. Default.
    /// </summary>
    Scan,

    /// <summary>Frequencies relative to each item's strongest line, as in lines.csv: drift of the spacings only; hops cannot be seen.</summary>
    Anchor,
}

/// <summary>Settings of <see cref="LineTracker"/>.</summary>
public sealed record TrackOptions
{
    /// <summary>Lines of consecutive items closer than this (or 3× the larger frequency σ, when that is more) belong to one track. Default 20 MHz.</summary>
    public double ToleranceHz { get; init; } = 20e6;

    public TrackFrame Frame { get; init; } = TrackFrame.Scan;

    /// <summary>A track missing from more than this many consecutive items is closed. Default 10.</summary>
    public int MaxGap { get; init; } = 10;

    /// <summary>Draws track.png and smsr.png; null: no figures.</summary>
    public IFigureWriter? Figures { get; init; }
}

/// <summary>One line of one item, placed on a track.</summary>
public sealed record TrackPoint(double TimeS, string Id, int Track, double FrequencyHz, double? SigmaHz, double Intensity, bool Strongest);

/// <summary>One track: a line followed through the items, with its drift (least-squares slope of frequency on time).</summary>
public sealed record TrackSummary(int Track, int Points, double FirstTimeS, double LastTimeS, double MeanFrequencyHz, double? DriftHzPerS,
    double? DriftSigmaHzPerS, double MeanIntensity);

/// <summary>A mode hop: the strongest line moved to another track between two consecutive items.</summary>
public sealed record ModeHop(double TimeS, string FromId, string ToId, double JumpHz, int FromTrack, int ToTrack);

/// <summary>Per-item values over time.</summary>
/// <param name="SmsrDb">Side-mode suppression: the summary's smsr_db when given, else strongest over second-strongest line, dB.</param>
/// <param name="SmsrFromSummary">True when <paramref name="SmsrDb"/> came from the summary's mode analysis.</param>
public sealed record SeriesPoint(double TimeS, string Id, string? Timestamp, int Lines, double? StrongestHz, double? SmsrDb, bool SmsrFromSummary,
    double? ModeSpacingHz, bool Hop);

/// <summary>What <see cref="LineTracker.Run"/> found and wrote.</summary>
public sealed record TrackResult(IReadOnlyList<SeriesPoint> Series, IReadOnlyList<TrackSummary> Tracks, IReadOnlyList<ModeHop> Hops,
    IReadOnlyList<string> Files, IReadOnlyList<string> Warnings, DateTimeOffset? Origin)
{
    /// <summary>All points, in time order (also written to track.csv).</summary>
    public IReadOnlyList<TrackPoint> Points { get; init; } = [];
}

/// <summary>
/// Follows lines through a time-ordered batch: reads summary.csv (ids, status, time stamps), each finished item's
/// done.json and lines.csv, links lines of consecutive items by nearest frequency within a tolerance (greedy,
/// closest pairs first), fits each track's drift, and flags a mode hop whenever the strongest line changes track.
/// Writes track.csv, tracks.csv, hops.csv, series.csv and (optionally) track.png and smsr.png.
/// </summary>
/// <remarks>Holds one small record per item and per line in memory (for ordering by time and for the plots).</remarks>
public static class LineTracker
{
    /// <summary>Tracks the batch in <paramref name="batchDirectory"/> and writes into <paramref name="outDirectory"/> (default: DIR/track).</summary>
    public static TrackResult Run(string batchDirectory, string? outDirectory = null, TrackOptions? options = null)
    {
        options ??= new TrackOptions();
        if (!(options.ToleranceHz > 0)) throw new InputException($"the tolerance must be a positive frequency but got {options.ToleranceHz} Hz");
        var dir = Path.GetFullPath(batchDirectory);
        var summaryPath = Path.Combine(dir, BatchLayout.SummaryFile);
        if (!File.Exists(summaryPath))
            throw new InputException(Directory.Exists(Path.Combine(dir, BatchLayout.ShardsFolder))
                ? $"no summary.csv in {dir}: this batch ran in shards; run 'orderunfold merge {dir}' first"
                : $"no summary.csv in {dir}: expected the output folder of 'orderunfold batch'", dir);
        var outDir = Path.GetFullPath(outDirectory ?? Path.Combine(dir, "track"));
        var warnings = new List<string>();

        // items in time order
        var rows = new List<(string Id, string? Stamp, DateTimeOffset? When, double? Smsr, double? Spacing)>();
        var failed = 0;
        foreach (var r in SummaryTable.Read(summaryPath))
        {
            if (r.Status != ItemStatus.Ok)
            {
                failed++;
                continue;
            }

            DateTimeOffset? when = r.Timestamp is string t && Manifest.TryParseTimestamp(t, out var w) ? w : null;
            rows.Add((r.Id, r.Timestamp, when, r.SmsrDb, r.ModeSpacingHz));
        }

        if (failed > 0) warnings.Add($"{failed} failed item(s) left out");
        var timed = rows.Count(r => r.When is not null);
        DateTimeOffset? origin = null;
        List<(string Id, string? Stamp, double T, double? Smsr, double? Spacing)> items;
        if (timed == 0)
        {
            warnings.Add("no item has a time stamp: items are taken in id order, one time unit (\"s\") per item");
            items = rows.Select((r, i) => (r.Id, r.Stamp, (double)i, r.Smsr, r.Spacing)).ToList();
        }
        else
        {
            if (timed < rows.Count) warnings.Add($"{rows.Count - timed} item(s) without a time stamp left out");
            origin = rows.Where(r => r.When is not null).Min(r => r.When!.Value);
            items = rows.Where(r => r.When is not null)
                .Select(r => (r.Id, r.Stamp, (r.When!.Value - origin.Value).TotalSeconds, r.Smsr, r.Spacing))
                .OrderBy(r => r.Item3).ThenBy(r => r.Id, ItemId.Order).ToList();
        }

        var series = new List<SeriesPoint>(items.Count);
        var points = new List<TrackPoint>();
        var tracks = new List<TrackState>();
        var hops = new List<ModeHop>();
        double? frame0 = null, framePrev = null;
        (int Track, double Position, string Id)? lastStrongest = null;
        for (var k = 0; k < items.Count; k++)
        {
            var (id, stamp, t, smsrSummary, spacing) = items[k];
            var itemDir = BatchLayout.Item(dir, id);
            var record = ItemRecord.TryRead(Path.Combine(itemDir, BatchLayout.DoneFile));
            var lines = ReadLines(Path.Combine(itemDir, OutputNames.Lines), warnings);
            if (record is null || lines is null)
            {
                warnings.Add($"{id}: no readable done.json or lines.csv; left out");
                continue;
            }

            var folded = record.OrdersResolved == false ? record.FrameFsrHz : null;
            double? shift = 0;
            if (options.Frame == TrackFrame.Scan)
            {
                if (record.StrongestLineHz is double s && record.FrameFsrHz is double fsr)
                {
                    // unwrap the scan position (known modulo the FSR) to the branch nearest the previous item
                    if (framePrev is double prev) s += Math.Round((prev - s) / fsr) * fsr;
                    frame0 ??= s;
                    framePrev = s;
                    shift = s - frame0.Value;
                }
                else
                {
                    shift = null;
                }
            }

            double? smsr = smsrSummary;
            var fromSummary = smsr is not null;
            if (smsr is null && lines.Count >= 2)
            {
                var sorted = lines.Select(l => l.Intensity).OrderByDescending(v => v).ToArray();
                if (sorted[1] > 0) smsr = 10 * Math.Log10(sorted[0] / sorted[1]);
            }

            if (lines.Count == 0 || shift is null)
            {
                series.Add(new SeriesPoint(t, id, stamp, lines.Count, null, smsr, fromSummary, spacing, false));
                continue;
            }

            var positions = lines.Select(l => l.FrequencyHz + shift.Value).ToArray();
            var assigned = Associate(positions, lines, tracks, k, options, folded);
            var strongest = Enumerable.Range(0, lines.Count).MaxBy(i => lines[i].Intensity);
            var hop = false;
            if (lastStrongest is { } ls && ls.Track != assigned[strongest])
            {
                var jump = positions[strongest] - ls.Position;
                if (folded is double p) jump -= Math.Round(jump / p) * p;
                hops.Add(new ModeHop(t, ls.Id, id, jump, ls.Track, assigned[strongest]));
                hop = true;
            }

            lastStrongest = (assigned[strongest], positions[strongest], id);
            for (var i = 0; i < lines.Count; i++) tracks[assigned[i] - 1].Add(t, tracks[assigned[i] - 1].LastPosition, lines[i].Intensity);
            for (var i = 0; i < lines.Count; i++)
                points.Add(new TrackPoint(t, id, assigned[i], tracks[assigned[i] - 1].LastPosition, lines[i].SigmaHz, lines[i].Intensity, i == strongest));
            series.Add(new SeriesPoint(t, id, stamp, lines.Count, tracks[assigned[strongest] - 1].LastPosition, smsr, fromSummary, spacing, hop));
        }

        if (series.Count == 0) throw new InputException($"no finished item to track in {summaryPath}", summaryPath);
        var summaries = tracks.Select(s => s.Summary()).ToList();
        var files = Write(outDir, origin, series, points, summaries, hops, options, warnings);
        return new TrackResult(series, summaries, hops, files, warnings, origin) { Points = points };
    }

    private sealed record LineRow(double FrequencyHz, double? SigmaHz, double Intensity);

    private sealed class TrackState(int number)
    {
        public int Number { get; } = number;
        public double LastPosition { get; set; }
        public double? LastSigma { get; set; }
        public int LastItem { get; set; }
        private int _n;
        private double _t0, _f0, _st, _sf, _stt, _stf, _sff, _si;
        private double _first, _last;

        public void Add(double t, double f, double intensity)
        {
            if (_n == 0)
            {
                _t0 = t;
                _f0 = f;
                _first = t;
            }

            var x = t - _t0;
            var y = f - _f0;
            _n++;
            _st += x;
            _sf += y;
            _stt += x * x;
            _stf += x * y;
            _sff += y * y;
            _si += intensity;
            _last = t;
        }

        public TrackSummary Summary()
        {
            double? slope = null, sigma = null;
            var sxx = _stt - _st * _st / _n;
            if (_n >= 3 && sxx > 0)
            {
                var sxy = _stf - _st * _sf / _n;
                var syy = _sff - _sf * _sf / _n;
                slope = sxy / sxx;
                var ssr = Math.Max(0, syy - slope.Value * sxy);
                sigma = Math.Sqrt(ssr / (_n - 2) / sxx);
            }

            return new TrackSummary(Number, _n, _first, _last, _f0 + _sf / _n, slope, sigma, _si / _n);
        }
    }

    /// <summary>Links the lines of item <paramref name="k"/> to open tracks, closest pairs first; returns the 1-based track of each line.</summary>
    private static int[] Associate(double[] positions, List<LineRow> lines, List<TrackState> tracks, int k, TrackOptions options, double? foldedFsr)
    {
        var pairs = new List<(double D, int Line, TrackState Track)>();
        foreach (var tr in tracks)
        {
            if (k - tr.LastItem > options.MaxGap + 1) continue;
            for (var i = 0; i < positions.Length; i++)
            {
                var d = positions[i] - tr.LastPosition;
                if (foldedFsr is double p) d -= Math.Round(d / p) * p;
                var tol = Math.Max(options.ToleranceHz, 3 * Math.Max(lines[i].SigmaHz ?? 0, tr.LastSigma ?? 0));
                if (Math.Abs(d) <= tol) pairs.Add((Math.Abs(d), i, tr));
            }
        }

        var result = new int[positions.Length];
        var used = new HashSet<int>();
        foreach (var (_, i, tr) in pairs.OrderBy(p => p.D).ThenBy(p => p.Track.Number).ThenBy(p => p.Line))
        {
            if (result[i] != 0 || used.Contains(tr.Number)) continue;
            result[i] = tr.Number;
            used.Add(tr.Number);
        }

        for (var i = 0; i < positions.Length; i++)
        {
            TrackState tr;
            var pos = positions[i];
            if (result[i] == 0)
            {
                tr = new TrackState(tracks.Count + 1);
                tracks.Add(tr);
                result[i] = tr.Number;
            }
            else
            {
                tr = tracks[result[i] - 1];
                // folded spectra: keep the track continuous across the FSR boundary
                if (foldedFsr is double p) pos += Math.Round((tr.LastPosition - pos) / p) * p;
            }

            tr.LastPosition = pos;
            tr.LastSigma = lines[i].SigmaHz;
            tr.LastItem = k;
        }

        return result;
    }

    /// <summary>lines.csv of one item (frequency_hz, frequency_sigma_hz, intensity), or null when unreadable.</summary>
    private static List<LineRow>? ReadLines(string path, List<string> warnings)
    {
        if (!File.Exists(path)) return null;
        var list = new List<LineRow>();
        int f = -1, s = -1, a = -1;
        var n = 0;
        foreach (var line in File.ReadLines(path))
        {
            n++;
            if (line.Length == 0) continue;
            if (!CsvLine.TrySplit(line, out var fields, out _)) return null;
            if (n == 1)
            {
                f = fields.IndexOf("frequency_hz");
                s = fields.IndexOf("frequency_sigma_hz");
                a = fields.IndexOf("intensity");
                if (f < 0 || a < 0) return null;
                continue;
            }

            if (!double.TryParse(fields[f], NumberStyles.Float, CultureInfo.InvariantCulture, out var hz) ||
                !double.TryParse(fields[a], NumberStyles.Float, CultureInfo.InvariantCulture, out var inten)) continue;
            double? sig = s >= 0 && double.TryParse(fields[s], NumberStyles.Float, CultureInfo.InvariantCulture, out var sv) ? sv : null;
            list.Add(new LineRow(hz, sig, inten));
        }

        return n == 0 ? null : list;
    }

    private static List<string> Write(string outDir, DateTimeOffset? origin, List<SeriesPoint> series, List<TrackPoint> points,
        List<TrackSummary> tracks, List<ModeHop> hops, TrackOptions options, List<string> warnings)
    {
        var c = CultureInfo.InvariantCulture;
        string F(double? v) => v is double d && double.IsFinite(d) ? d.ToString("R", c) : "";
        string Stamp(double t) => origin is DateTimeOffset o ? Manifest.FormatTimestamp(o.AddSeconds(t)) : "";
        var files = new List<string>();
        void Csv(string name, string header, IEnumerable<string> rows)
        {
            var path = Path.Combine(outDir, name);
            AtomicFile.Write(path, stream =>
            {
                using var w = new StreamWriter(stream, new UTF8Encoding(false), 1 << 16, leaveOpen: true) { NewLine = "\n" };
                w.WriteLine(header);
                foreach (var r in rows) w.WriteLine(r);
            });
            files.Add(path);
        }

        Csv("track.csv", "time_s,timestamp,id,track,frequency_hz,frequency_sigma_hz,intensity,intensity_db,strongest",
            points.Select(p => string.Join(",", F(p.TimeS), Stamp(p.TimeS), p.Id, p.Track.ToString(c), F(p.FrequencyHz), F(p.SigmaHz), F(p.Intensity),
                F(p.Intensity > 0 ? 10 * Math.Log10(p.Intensity) : null), p.Strongest ? "true" : "false")));
        Csv("tracks.csv", "track,points,first_time_s,last_time_s,mean_frequency_hz,drift_hz_per_s,drift_sigma_hz_per_s,mean_intensity",
            tracks.Select(t => string.Join(",", t.Track.ToString(c), t.Points.ToString(c), F(t.FirstTimeS), F(t.LastTimeS), F(t.MeanFrequencyHz),
                F(t.DriftHzPerS), F(t.DriftSigmaHzPerS), F(t.MeanIntensity))));
        Csv("hops.csv", "time_s,timestamp,from_id,to_id,jump_hz,from_track,to_track",
            hops.Select(h => string.Join(",", F(h.TimeS), Stamp(h.TimeS), h.FromId, h.ToId, F(h.JumpHz), h.FromTrack.ToString(c), h.ToTrack.ToString(c))));
        Csv("series.csv", "time_s,timestamp,id,lines,strongest_hz,smsr_db,smsr_source,mode_spacing_hz,hop",
            series.Select(s => string.Join(",", F(s.TimeS), s.Timestamp ?? "", s.Id, s.Lines.ToString(c), F(s.StrongestHz), F(s.SmsrDb),
                s.SmsrDb is null ? "" : s.SmsrFromSummary ? "summary" : "lines", F(s.ModeSpacingHz), s.Hop ? "true" : "false")));

        if (options.Figures is { } figures)
        {
            var hopTimes = hops.Select(h => h.TimeS).ToArray();
            var frameText = options.Frame == TrackFrame.Scan
                ? "frequency on the scan axis, relative to the first item's strongest line"
                : "frequency relative to each item's strongest line";
            var trackPng = Path.Combine(outDir, "track.png");
            figures.WriteTrack(trackPng, new TrackPlotInput(
                $"Lines over time ({series.Count} items, {tracks.Count} tracks, {hops.Count} mode hop{(hops.Count == 1 ? "" : "s")})",
                frameText, points.Select(p => p.TimeS).ToArray(), points.Select(p => p.FrequencyHz).ToArray(),
                points.Select(p => p.Intensity > 0 ? 10 * Math.Log10(p.Intensity) : double.NaN).ToArray(), hopTimes, origin));
            files.Add(trackPng);
            var smsr = series.Where(s => s.SmsrDb is not null).ToList();
            if (smsr.Count > 0)
            {
                var smsrPng = Path.Combine(outDir, "smsr.png");
                var source = smsr.All(s => s.SmsrFromSummary) ? "from the mode analysis" : smsr.Any(s => s.SmsrFromSummary) ? "mode analysis where given, else strongest ÷ second-strongest line" : "strongest ÷ second-strongest line";
                figures.WriteSeries(smsrPng, new SeriesPlotInput("Side-mode suppression over time", source, "SMSR (dB)",
                    smsr.Select(s => s.TimeS).ToArray(), smsr.Select(s => s.SmsrDb!.Value).ToArray(), hopTimes, origin));
                files.Add(smsrPng);
            }
            else
            {
                warnings.Add("no item has two or more lines or an smsr_db value: smsr.png not drawn");
            }
        }

        return files;
    }
}
