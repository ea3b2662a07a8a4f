using System.Globalization;

namespace OrderUnfold.Io;

/// <summary>Reads oscilloscope/DAQ delimited-text exports into traces and splits triangle ramps.</summary>
/// <remarks>
/// Reading finds the block of numbers by itself: settings lines before it ("Model,XYZ", "Sample Interval,2e-9")
/// are passed over, the header is the text row right above the numbers, and the delimiter (comma, semicolon,
/// tab) and decimal mark (point or comma) are detected unless given (see <see cref="SweepFileOptions"/>).
/// Rows at the start of the block whose x, y or ramp cell is empty, NaN or infinite are skipped; such a cell
/// later in the block is an error, since silently dropping a sample would shift the sweep. Every sample keeps
/// the line it came from, for messages further down the analysis.
/// </remarks>
public static class SweepReader
{
    /// <summary>Fewest samples a trace must have.</summary>
    public const int MinSamples = 16;

    /// <summary>Reads a trace. Throws <see cref="InputException"/> with file, line and column on bad input, and
    /// <see cref="OperationCanceledException"/> when <paramref name="cancellationToken"/> is cancelled while it reads.</summary>
    public static RawTrace Read(SweepFileOptions options, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(options);
        CheckOptions(options);
        return options.RampFile is null ? ReadOne(options, out _, cancellationToken) : ReadWithRampFile(options, cancellationToken);
    }

    /// <summary>Reads one file; <paramref name="xColumn"/> is the 1-based column x came from (null: rebuilt from the interval).</summary>
    private static RawTrace ReadOne(SweepFileOptions options, out int? xColumn, CancellationToken cancellationToken)
    {
        var path = options.Path;
        var text = ReadText(path, cancellationToken);
        if (string.IsNullOrWhiteSpace(text)) throw new InputException("the file is empty", path);

        DataLayout layout;
        try
        {
            layout = DelimitedText.Detect(DelimitedText.Head(text, DelimitedText.SampleLines),
                options.Delimiter, options.DecimalComma, options.HasHeader, path);
        }
        catch (CsvHelper.CsvFormatException e)
        {
            throw new InputException($"cannot split the file into fields: {e.Message}", path, inner: e);
        }

        var columns = ResolveColumns(options, layout);
        xColumn = columns.X + 1;
        var (xs, ys, rs, lines) = Extract(text, layout, columns, path, cancellationToken);

        if (ys.Count == 0)
            throw new InputException(
                $"no data rows with finite values in {DescribeUsed(columns, layout)} (all were empty, NaN or infinite)", path);
        if (ys.Count < MinSamples)
            throw new InputException($"needs at least {MinSamples} samples but got {ys.Count}", path);

        double[] x;
        if (columns.X is int xc)
        {
            x = xs.ToArray();
            CheckScanCoordinate(x, lines, options.Scan, Describe(xc, layout), xc + 1, path);
        }
        else
        {
            double dt = options.SampleIntervalS!.Value;
            x = new double[ys.Count];
            for (int i = 0; i < x.Length; i++) x[i] = i * dt;
        }

        double[]? ramp = options.Scan == ScanCoordinate.Ramp ? x : rs?.ToArray();
        return new RawTrace
        {
            Source = path,
            X = x,
            Y = ys.ToArray(),
            Ramp = ramp,
            Lines = lines.ToArray(),
            Scan = options.Scan,
        };
    }

    /// <summary>
    /// Reads a signal file and the ramp from a second file (one channel per file) and matches them by time: the ramp
    /// is interpolated linearly onto the signal's time stamps (identical stamps give the recorded values unchanged).
    /// Both time columns must increase strictly; the signal's record must lie within the ramp's (half a ramp sample
    /// interval of slack at either end), else the reader refuses, naming the first signal line outside.
    /// </summary>
    private static RawTrace ReadWithRampFile(SweepFileOptions options, CancellationToken cancellationToken)
    {
        if (options.RampColumn is not null)
            throw new InputException(
                "both a ramp column and a ramp file are named; the ramp comes from one of them, so give ramp_column or ramp_file",
                options.Path);
        var signal = ReadOne(options with { Scan = ScanCoordinate.Time, RampFile = null }, out var timeColumn, cancellationToken);
        var rampOptions = new SweepFileOptions
        {
            Path = options.RampFile!,
            XColumn = options.RampTimeColumn,
            YColumn = options.RampValueColumn,
            SampleIntervalS = options.RampTimeColumn is null && options.XColumn is null ? options.SampleIntervalS : null,
            Scan = ScanCoordinate.Time,
        };
        RawTrace ramp;
        try
        {
            ramp = ReadOne(rampOptions, out _, cancellationToken);
        }
        catch (InputException e) when (e.Message.StartsWith("time in ", StringComparison.Ordinal) && e.Message.Contains("not strictly increasing", StringComparison.Ordinal))
        {
            // the general hint (name a ramp column) does not apply to a ramp file
            var cut = e.Message.LastIndexOf(" (", StringComparison.Ordinal);
            throw new InputException(
                (cut > 0 ? e.Message[..cut] : e.Message) + "; the ramp file's time must increase at every sample to be matched with the signal",
                e.File, e.Line, e.Column, e);
        }

        var ts = signal.X;
        var tr = ramp.X;
        var step = (tr[^1] - tr[0]) / (tr.Length - 1);
        var slack = 0.5 * step;
        if (ts[^1] < tr[0] - slack || ts[0] > tr[^1] + slack)
            throw new InputException(
                $"the time bases do not overlap: the signal runs from {Fmt(ts[0])} to {Fmt(ts[^1])} s, the ramp in " +
                $"{options.RampFile} from {Fmt(tr[0])} to {Fmt(tr[^1])} s; the two files must record the same sweep",
                options.Path, signal.Lines[0], timeColumn);
        for (int i = 0; i < ts.Length; i++)
        {
            if (ts[i] >= tr[0] - slack && ts[i] <= tr[^1] + slack) continue;
            throw new InputException(
                $"the signal sample at {Fmt(ts[i])} s lies outside the time range of the ramp in {options.RampFile} " +
                $"({Fmt(tr[0])} to {Fmt(tr[^1])} s); the ramp must cover the whole signal record",
                options.Path, signal.Lines[i], timeColumn);
        }

        var spline = MathNet.Numerics.Interpolation.LinearSpline.InterpolateSorted(tr, ramp.Y);
        var matched = new double[ts.Length];
        for (int i = 0; i < ts.Length; i++) matched[i] = spline.Interpolate(Math.Clamp(ts[i], tr[0], tr[^1]));

        return signal with
        {
            X = options.Scan == ScanCoordinate.Ramp ? matched : signal.X,
            Ramp = matched,
            Scan = options.Scan,
            RampSource = options.RampFile,
        };
    }

    /// <summary>
    /// Splits a trace into single-direction sweeps (one sweep when there is no triangle ramp).
    /// <para>
    /// Without a ramp record the whole trace is one sweep with <see cref="RampDirection.Single"/> (x must be
    /// strictly monotone; <paramref name="directions"/> does not apply). With a ramp the trace is cut at the
    /// ramp's turning points (see <see cref="RampSegments.Find"/>), each segment is labelled
    /// <see cref="RampDirection.Up"/> or <see cref="RampDirection.Down"/> (also when there is only one),
    /// short segments (flybacks, partial ends) are dropped, and those matching <paramref name="directions"/>
    /// are kept, named "file (up #1)", "file (down #1)", … in trace order. When x is the recorded ramp
    /// and a segment is not strictly monotone (noise, ADC steps), x over that segment is replaced by a
    /// monotone fit of the ramp against the sample index (see <see cref="RampSegments.MonotoneFit"/>).
    /// </para>
    /// </summary>
    public static IReadOnlyList<Sweep> Split(RawTrace trace, DirectionChoice directions = DirectionChoice.Both)
    {
        ArgumentNullException.ThrowIfNull(trace);
        int n = trace.X.Length;
        if (trace.Y.Length != n || trace.Lines.Length != n || (trace.Ramp is not null && trace.Ramp.Length != n))
            throw new ArgumentException("trace arrays X, Y, Lines (and Ramp) must have the same length", nameof(trace));
        if (n < 2) throw new InputException($"needs at least {MinSamples} samples but got {n}", trace.Source);
        var lsb = Digitiser.QuantisationStep(trace.Y);
        var clipped = Digitiser.ClippedSamples(trace.Y, lsb);
        return trace.Ramp is null ? [WholeTrace(trace, lsb, clipped)] : SplitAtRampTurns(trace, trace.Ramp, directions, lsb, clipped);
    }

    /// <summary>A trace without a ramp is one sweep; its x must be strictly monotone.</summary>
    private static Sweep WholeTrace(RawTrace trace, double? lsb, int[] clipped)
    {
        var file = trace.Source;
        CheckFinite(trace.X, trace.Lines, file, "x");
        double sign = Math.Sign(trace.X[1] - trace.X[0]);
        for (int i = 1; i < trace.X.Length; i++)
        {
            if (!(sign * (trace.X[i] - trace.X[i - 1]) > 0))
                throw new InputException(
                    $"x is not monotonic at line {trace.Lines[i]}; name a ramp column to split a triangle ramp",
                    file, trace.Lines[i]);
        }

        return new Sweep
        {
            Name = Path.GetFileName(file),
            Source = file,
            X = (double[])trace.X.Clone(),
            Y = (double[])trace.Y.Clone(),
            Direction = RampDirection.Single,
            Scan = trace.Scan,
            FirstSample = 0,
            QuantisationStep = lsb,
            ClippedSamples = clipped,
        };
    }

    /// <summary>The trace cut at the ramp's turning points, one sweep per wanted segment.</summary>
    private static List<Sweep> SplitAtRampTurns(RawTrace trace, double[] ramp, DirectionChoice directions, double? lsb, int[] clipped)
    {
        var file = trace.Source;
        CheckFinite(ramp, trace.Lines, file, "the ramp");
        var segments = FindSegments(trace, ramp);
        var sweeps = new List<Sweep>();
        int ups = 0, downs = 0;
        foreach (var seg in segments)
        {
            int number = seg.Direction == RampDirection.Up ? ++ups : ++downs;
            bool wanted = directions == DirectionChoice.Both ||
                          (directions == DirectionChoice.Up) == (seg.Direction == RampDirection.Up);
            if (!wanted) continue;
            var label = seg.Direction == RampDirection.Up ? "up" : "down";
            sweeps.Add(new Sweep
            {
                Name = $"{Path.GetFileName(file)} ({label} #{number})",
                Source = file,
                X = SegmentX(trace, seg),
                Y = trace.Y.AsSpan(seg.Start, seg.Count).ToArray(),
                Direction = seg.Direction,
                Scan = trace.Scan,
                FirstSample = seg.Start,
                QuantisationStep = lsb,
                ClippedSamples = clipped.Where(i => i >= seg.Start && i < seg.Start + seg.Count).Select(i => i - seg.Start).ToArray(),
            });
        }

        if (sweeps.Count == 0)
        {
            var wantedLabel = directions == DirectionChoice.Up ? "up" : "down";
            throw new InputException(
                segments.Count == 0
                    ? "the ramp has no segment long enough to be a sweep"
                    : $"no {wantedLabel}-going ramp segment in the trace (found {ups} up, {downs} down)",
                file);
        }
        return sweeps;
    }

    /// <summary>The ramp's segments; a constant ramp is bad input, with how much it moved.</summary>
    private static List<RampSegment> FindSegments(RawTrace trace, double[] ramp)
    {
        try
        {
            return RampSegments.Find(ramp);
        }
        catch (RampConstantException e)
        {
            var detail = e.Noise > 0
                ? $" (it moves by {Fmt(e.Span)} V, within its noise of {Fmt(e.Noise)} V)"
                : $" (all samples are {Fmt(ramp[0])} V)";
            var from = trace.RampSource is null ? "" : $" (read from {trace.RampSource})";
            throw new InputException("ramp" + from + " is constant" + detail + "; a sweep needs a moving ramp", trace.Source);
        }
    }

    /// <summary>A segment's scan coordinate; a recorded ramp that is not strictly monotone over it is replaced by a
    /// monotone fit against the sample index.</summary>
    private static double[] SegmentX(RawTrace trace, RampSegment seg)
    {
        double[] x = trace.X.AsSpan(seg.Start, seg.Count).ToArray();
        if (trace.Scan != ScanCoordinate.Ramp) return x;
        double sign = seg.Direction == RampDirection.Up ? 1 : -1;
        if (RampSegments.IsStrictlyMonotone(x, sign)) return x;
        return RampSegments.MonotoneFit(x, seg.Direction)
               ?? throw new InputException(
                   $"the ramp between lines {trace.Lines[seg.Start]} and {trace.Lines[seg.End - 1]} does not go " +
                   $"{(sign > 0 ? "up" : "down")} steadily enough to be used as the scan coordinate",
                   trace.Source, trace.Lines[seg.Start]);
    }

    /// <summary>Read and split in one call.</summary>
    public static IReadOnlyList<Sweep> ReadSweeps(SweepFileOptions options, CancellationToken cancellationToken = default) =>
        Split(Read(options, cancellationToken), options.Directions);

    // ---------------------------------------------------------------------------------------------------------

    /// <summary>0-based column indices in use; X null means time is rebuilt from the sample interval.</summary>
    private readonly record struct Columns(int? X, int Y, int? Ramp);

    private static void CheckOptions(SweepFileOptions o)
    {
        if (o.SampleIntervalS is double dt && !(double.IsFinite(dt) && dt > 0))
            throw new InputException($"sample interval must be a positive time but got {Fmt(dt)} s", o.Path);
        if (o.Delimiter is char d && Array.IndexOf(DelimitedText.Delimiters, d) < 0)
            throw new InputException(
                $"delimiter must be ',', ';' or tab but got {(char.IsControl(d) ? $"U+{(int)d:X4}" : $"'{d}'")}", o.Path);
    }

    private static string ReadText(string path, CancellationToken cancellationToken)
    {
        // type, size and line-length limits, checked before and while reading (Io/InputLimits.cs)
        return InputLimits.ReadAllText(path, "sweep file", cancellationToken);
    }

    private static Columns ResolveColumns(SweepFileOptions o, DataLayout layout)
    {
        var path = o.Path;
        int n = layout.FieldCount;
        int? x;
        int? ramp = null;
        if (o.Scan == ScanCoordinate.Ramp)
        {
            int? fromX = o.XColumn is null ? null : Resolve(o.XColumn, "x", layout, path);
            int? fromRamp = o.RampColumn is null ? null : Resolve(o.RampColumn, "ramp", layout, path);
            if (fromX is int a && fromRamp is int b && a != b)
                throw new InputException(
                    $"with the ramp as scan coordinate the x column is the ramp, but x is {Describe(a, layout)} " +
                    $"and the ramp is {Describe(b, layout)}", path);
            x = fromX ?? fromRamp;
            if (x is null)
            {
                if (o.SampleIntervalS is not null)
                    throw new InputException(
                        "the scan coordinate is the ramp, so name the ramp voltage column as x; a sample interval only rebuilds time",
                        path);
                if (n == 1)
                    throw new InputException("one column only: a ramp scan needs a ramp voltage column and a signal column", path);
                x = 0;
            }
        }
        else
        {
            if (o.XColumn is not null) x = Resolve(o.XColumn, "x", layout, path);
            else if (o.SampleIntervalS is not null) x = null;
            else if (n == 1)
                throw new InputException("one column only: give sample_interval to rebuild the time axis", path);
            else x = 0;
            if (o.RampColumn is not null) ramp = Resolve(o.RampColumn, "ramp", layout, path);
        }

        int y = o.YColumn is null ? n - 1 : Resolve(o.YColumn, "y", layout, path);
        if (x == y)
            throw new InputException($"x and y are the same column: {Describe(y, layout)}", path);
        if (ramp is int r && (r == y || r == x))
            throw new InputException($"the ramp column is also the {(r == y ? "y" : "x")} column: {Describe(r, layout)}", path);
        return new Columns(x, y, ramp);
    }

    /// <summary>A column given by header name (case-insensitive, trimmed) or by 1-based index; returns the 0-based index.</summary>
    private static int Resolve(string spec, string role, DataLayout layout, string path)
    {
        var s = spec.Trim();
        int n = layout.FieldCount;
        bool isIndex = (s.Length > 0 && s.All(char.IsAsciiDigit)) ||
                       (s.Length > 1 && s[0] == '-' && s[1..].All(char.IsAsciiDigit));
        if (isIndex)
        {
            if (!int.TryParse(s, NumberStyles.AllowLeadingSign, CultureInfo.InvariantCulture, out int k)) k = s[0] == '-' ? -1 : int.MaxValue;
            if (k < 1)
                throw new InputException($"{role} column index must be 1 or more but got \"{spec}\"", path);
            if (k > n)
                throw new InputException(
                    $"{role} column {k} is out of range: the data rows have {n} field{(n == 1 ? "" : "s")}", path, layout.FirstDataLine);
            return k - 1;
        }

        if (layout.Header is null)
            throw new InputException(
                $"{role} column \"{spec}\" is given by name, but no header row was found above the data (line " +
                $"{layout.FirstDataLine}); give its 1-based index (1 to {n}) or set the header option", path);

        var matches = new List<int>();
        for (int i = 0; i < layout.Header.Length; i++)
            if (string.Equals(layout.Header[i].Trim(), s, StringComparison.OrdinalIgnoreCase)) matches.Add(i);
        if (matches.Count == 0 && layout.NamesAbove is { } names)
        {
            // two header lines (names, then units): a name from the upper line
            for (int i = 0; i < names.Length; i++)
                if (string.Equals(names[i].Trim(), s, StringComparison.OrdinalIgnoreCase)) matches.Add(i);
        }

        if (matches.Count == 0)
            throw new InputException(
                $"no {role} column named \"{spec}\"; the header has {string.Join(", ", layout.Header.Select(h => $"\"{h}\""))}" +
                (layout.NamesAbove is { } above ? $" (and the line above it {string.Join(", ", above.Select(h => $"\"{h}\""))})" : ""),
                path, layout.HeaderLine);
        if (matches.Count > 1)
            throw new InputException(
                $"{role} column name \"{spec}\" matches columns {string.Join(" and ", matches.Select(m => m + 1))}; give its index",
                path, layout.HeaderLine);
        if (matches[0] >= n)
            throw new InputException(
                $"{role} column \"{spec}\" is column {matches[0] + 1}, but the data rows have only {n} fields", path, layout.HeaderLine);
        return matches[0];
    }

    private static (List<double> X, List<double> Y, List<double>? Ramp, List<int> Lines) Extract(
        string text, DataLayout layout, Columns columns, string path, CancellationToken cancellationToken)
    {
        var xs = new List<double>();
        var ys = new List<double>();
        var rs = columns.Ramp is null ? null : new List<double>();
        var lines = new List<int>();
        int n = layout.FieldCount;
        var used = new List<int>(3);
        if (columns.X is int cx) used.Add(cx);
        used.Add(columns.Y);
        if (columns.Ramp is int cr) used.Add(cr);
        var values = new double[3];
        int? blankLine = null;

        try
        {
            foreach (var row in DelimitedText.CellRows(text, layout.Delimiter))
            {
                cancellationToken.ThrowIfCancellationRequested();
                if (row.Line < layout.FirstDataLine) continue;
                if (row.IsBlank)
                {
                    blankLine ??= row.Line;
                    continue;
                }

                bool started = lines.Count > 0;
                if (blankLine is int bl && started)
                    throw new InputException(
                        $"empty line {bl} inside the data (the numbers go on at line {row.Line}); remove it or end the data there",
                        path, bl);
                blankLine = null;

                if (row.Count > n)
                    throw new InputException(
                        $"expected {n} field{(n == 1 ? "" : "s")} as in the rows above but got {row.Count}: " +
                        $"\"{row.CellText(n)}\" in column {n + 1}", path, row.Line, n + 1);

                bool skip = false;
                for (int k = 0; k < used.Count; k++)
                {
                    int c = used[k];
                    var cell = c < row.Count ? row.Cell(c) : ReadOnlySpan<char>.Empty;
                    var kind = DelimitedText.Classify(cell, layout.DecimalComma, out values[k]);
                    if (kind == CellKind.Finite) continue;
                    if (!started && kind is CellKind.Empty or CellKind.NonFinite)
                    {
                        skip = true; // leading rows before the first finite row
                        continue;
                    }
                    var why = kind switch
                    {
                        CellKind.NonFinite => " (a missing value inside the data would shift the sweep)",
                        CellKind.Text when cell.Contains(',') && !layout.DecimalComma => " (decimal comma? set the decimal comma option)",
                        _ => "",
                    };
                    throw new InputException(
                        $"expected a number in {Describe(c, layout)} but got \"{cell.ToString()}\"{why}", path, row.Line, c + 1);
                }
                if (skip) continue;

                int j = 0;
                if (columns.X is not null) xs.Add(values[j++]);
                ys.Add(values[j++]);
                if (rs is not null) rs.Add(values[j]);
                lines.Add(row.Line);
            }
        }
        catch (CsvHelper.CsvFormatException e)
        {
            throw new InputException($"cannot split the file into fields: {e.Message}", path, inner: e);
        }

        return (xs, ys, rs, lines);
    }

    private static void CheckScanCoordinate(double[] x, List<int> lines, ScanCoordinate scan, string column, int col, string path)
    {
        bool constant = true;
        for (int i = 1; i < x.Length && constant; i++) constant = x[i] == x[0];
        if (constant)
            throw new InputException($"the scan coordinate in {column} is constant ({Fmt(x[0])})", path, null, col);

        if (scan != ScanCoordinate.Time) return;
        for (int i = 1; i < x.Length; i++)
        {
            if (!(x[i] > x[i - 1]))
                throw new InputException(
                    $"time in {column} is not strictly increasing at line {lines[i]}: {Fmt(x[i])} follows {Fmt(x[i - 1])} " +
                    (x[i] == x[i - 1]
                        ? "(a repeated time stamp: if the column is rounded, leave out x_column and give sample_interval to rebuild time from the sample number)"
                        : "(for a triangle ramp recorded against time, name the ramp column)"), path, lines[i], col);
        }
    }

    private static void CheckFinite(double[] v, int[] lines, string file, string what)
    {
        for (int i = 0; i < v.Length; i++)
            if (!double.IsFinite(v[i]))
                throw new InputException($"{what} is not a finite number at line {lines[i]}", file, lines[i]);
    }

    private static string Describe(int column, DataLayout layout)
    {
        var header = layout.Header;
        return header is not null && column < header.Length && header[column].Length > 0
            ? $"column {column + 1} (\"{header[column]}\")"
            : $"column {column + 1}";
    }

    private static string DescribeUsed(Columns c, DataLayout layout)
    {
        var parts = new List<string>();
        if (c.X is int x) parts.Add(Describe(x, layout));
        parts.Add(Describe(c.Y, layout));
        if (c.Ramp is int r) parts.Add(Describe(r, layout));
        return string.Join(", ", parts);
    }

    private static string Fmt(double v) => v.ToString("G6", CultureInfo.InvariantCulture);
}
