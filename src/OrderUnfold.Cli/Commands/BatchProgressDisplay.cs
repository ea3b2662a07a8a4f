using OrderUnfold.Pipeline.Batch;

namespace OrderUnfold.Cli.Commands;

/// <summary>
/// Progress of a batch on standard error: a one-line bar redrawn in place on a terminal, or a plain line every
/// few seconds when the output goes to a file (as in a cluster job's log). The first failures are printed as
/// they happen.
/// </summary>
internal sealed class BatchProgressDisplay(TextWriter err, bool quiet, bool terminal) : IProgress<BatchProgress>
{
    private const int FailuresShown = 10;
    private readonly object _gate = new();
    private DateTime _lastDraw = DateTime.MinValue;
    private BatchProgress? _last;
    private int _failuresShown;
    private bool _drawn;

    public void Report(BatchProgress p)
    {
        if (quiet) return;
        lock (_gate)
        {
            if (_last is not null && p.Finished < _last.Finished) return; // a late report from another worker
            _last = p;
            if (p.LastError is not null && !p.LastSkipped && _failuresShown < FailuresShown)
            {
                Clear();
                err.WriteLine($"failed {p.LastId}: {p.LastError}");
                if (++_failuresShown == FailuresShown) err.WriteLine($"(further failures are listed in the summary only)");
            }

            var now = DateTime.UtcNow;
            var interval = terminal ? TimeSpan.FromMilliseconds(100) : TimeSpan.FromSeconds(5);
            if (now - _lastDraw < interval && p.Finished != p.Total) return;
            _lastDraw = now;
            Draw(p);
        }
    }

    public void Finish()
    {
        lock (_gate)
        {
            if (quiet || _last is null) return;
            if (terminal)
            {
                Draw(_last);
                err.WriteLine();
                _drawn = false;
            }
        }
    }

    private void Draw(BatchProgress p)
    {
        var remaining = p.ItemsPerSecond > 0 ? TimeSpan.FromSeconds((p.Total - p.Finished) / p.ItemsPerSecond) : (TimeSpan?)null;
        var eta = remaining is TimeSpan r ? $" ETA {(int)r.TotalHours}:{r.Minutes:D2}:{r.Seconds:D2}" : "";
        var counts = $"{p.Finished}/{p.Total}  ok {p.Ok}  failed {p.Failed}  skipped {p.Skipped}  {p.ItemsPerSecond:F1} items/s{eta}";
        if (terminal)
        {
            const int width = 30;
            var filled = p.Total > 0 ? (int)(width * p.Finished / p.Total) : 0;
            err.Write($"\r[{new string('#', filled)}{new string('.', width - filled)}] {counts}   ");
            err.Flush();
            _drawn = true;
        }
        else
        {
            err.WriteLine($"batch: {counts}");
        }
    }

    private void Clear()
    {
        if (!_drawn) return;
        err.Write("\r" + new string(' ', 110) + "\r");
        _drawn = false;
    }
}
