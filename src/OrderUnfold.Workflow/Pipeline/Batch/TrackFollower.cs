namespace OrderUnfold.Pipeline.Batch;

/// <summary>One finished item to track: id, time stamp, time since the first item, and the summary's mode values.</summary>
internal sealed record TimedItem(string Id, string? Stamp, double TimeS, double? SmsrDb, double? ModeSpacingHz);

/// <summary>
/// The state of <see cref="LineTracker"/> while it walks through the items in time order: open tracks, the scan-axis
/// frame, the last strongest line, and what has been found (points, series, hops).
/// </summary>
internal sealed class TrackFollower(string batchDirectory, TrackOptions options, DateTimeOffset? origin, List<string> warnings)
{
    private readonly List<TrackState> _tracks = [];
    private double? _frame0, _framePrev;
    private (int Track, double Position, string Id)? _lastStrongest;

    public List<SeriesPoint> Series { get; } = [];
    public List<TrackPoint> Points { get; } = [];
    public List<ModeHop> Hops { get; } = [];

    public List<TrackSummary> Summaries() => _tracks.Select(s => s.Summary()).ToList();

    /// <summary>Places the lines of item number <paramref name="k"/> on tracks.</summary>
    public void Add(int k, TimedItem item)
    {
        var itemDir = BatchLayout.Item(batchDirectory, item.Id);
        var record = ItemRecord.TryRead(Path.Combine(itemDir, BatchLayout.DoneFile));
        var lines = TrackFiles.ReadItemLines(Path.Combine(itemDir, OutputNames.Lines));
        if (record is null || lines is null)
        {
            warnings.Add($"{item.Id}: no readable done.json or lines.csv; left out");
            return;
        }

        var folded = record.OrdersResolved == false ? record.FrameFsrHz : null;
        var shift = options.Frame == TrackFrame.Scan ? ScanShift(record) : 0;
        var (smsr, source) = Smsr(item, lines);
        var point = new SeriesPoint
        {
            TimeS = item.TimeS, Timestamp = item.Stamp, Id = item.Id, Lines = lines.Count, SmsrDb = smsr, SmsrSource = source, ModeSpacingHz = item.ModeSpacingHz,
        };
        if (lines.Count == 0 || shift is null)
        {
            Series.Add(point);
            return;
        }

        var positions = lines.Select(l => l.FrequencyHz + shift.Value).ToArray();
        var assigned = Associate(positions, lines, k, folded);
        var strongest = Enumerable.Range(0, lines.Count).MaxBy(i => lines[i].Intensity);
        var hop = false;
        if (_lastStrongest is { } ls && ls.Track != assigned[strongest])
        {
            var jump = positions[strongest] - ls.Position;
            if (folded is double p) jump -= Math.Round(jump / p) * p;
            Hops.Add(new ModeHop
            {
                TimeS = item.TimeS, Timestamp = Stamp(item.TimeS), FromId = ls.Id, ToId = item.Id, JumpHz = jump, FromTrack = ls.Track, ToTrack = assigned[strongest],
            });
            hop = true;
        }

        _lastStrongest = (assigned[strongest], positions[strongest], item.Id);
        for (var i = 0; i < lines.Count; i++) _tracks[assigned[i] - 1].Add(item.TimeS, _tracks[assigned[i] - 1].LastPosition, lines[i].Intensity);
        for (var i = 0; i < lines.Count; i++) Points.Add(Point(item, assigned[i], lines[i], i == strongest));
        Series.Add(point with { StrongestHz = _tracks[assigned[strongest] - 1].LastPosition, Hop = hop });
    }

    private TrackPoint Point(TimedItem item, int track, ItemLine line, bool strongest) => new()
    {
        TimeS = item.TimeS, Timestamp = Stamp(item.TimeS), Id = item.Id, Track = track, FrequencyHz = _tracks[track - 1].LastPosition, SigmaHz = line.SigmaHz,
        Intensity = line.Intensity, IntensityDb = line.Intensity > 0 ? 10 * Math.Log10(line.Intensity) : null, Strongest = strongest,
    };

    private string? Stamp(double t) => origin is DateTimeOffset o ? Manifest.FormatTimestamp(o.AddSeconds(t)) : null;

    /// <summary>The item's shift onto the first item's scan axis: its strongest line's scan position (known modulo the
    /// FSR), unwrapped to the branch nearest the previous item's; null when the record lacks it.</summary>
    private double? ScanShift(ItemRecord record)
    {
        if (record.StrongestLineHz is not double s || record.FrameFsrHz is not double fsr) return null;
        if (_framePrev is double prev) s += Math.Round((prev - s) / fsr) * fsr;
        _frame0 ??= s;
        _framePrev = s;
        return s - _frame0.Value;
    }

    /// <summary>The summary's SMSR when given, else strongest over second-strongest line, dB.</summary>
    private static (double? Db, SmsrSource? Source) Smsr(TimedItem item, List<ItemLine> lines)
    {
        if (item.SmsrDb is double db) return (db, SmsrSource.Summary);
        if (lines.Count < 2) return (null, null);
        var sorted = lines.Select(l => l.Intensity).OrderByDescending(v => v).ToArray();
        return sorted[1] > 0 ? (10 * Math.Log10(sorted[0] / sorted[1]), SmsrSource.Lines) : (null, null);
    }

    /// <summary>Links the lines of item <paramref name="k"/> to open tracks, closest pairs first; returns the 1-based track of each line.</summary>
    private int[] Associate(double[] positions, List<ItemLine> lines, int k, double? foldedFsr)
    {
        var pairs = new List<(double D, int Line, TrackState Track)>();
        foreach (var tr in _tracks)
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
                tr = new TrackState(_tracks.Count + 1);
                _tracks.Add(tr);
                result[i] = tr.Number;
            }
            else
            {
                tr = _tracks[result[i] - 1];
                // folded spectra: keep the track continuous across the FSR boundary
                if (foldedFsr is double p) pos += Math.Round((tr.LastPosition - pos) / p) * p;
            }

            tr.LastPosition = pos;
            tr.LastSigma = lines[i].SigmaHz;
            tr.LastItem = k;
        }

        return result;
    }

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

            return new TrackSummary
            {
                Track = Number, Points = _n, FirstTimeS = _first, LastTimeS = _last, MeanFrequencyHz = _f0 + _sf / _n, DriftHzPerS = slope,
                DriftSigmaHzPerS = sigma, MeanIntensity = _si / _n,
            };
        }
    }
}
