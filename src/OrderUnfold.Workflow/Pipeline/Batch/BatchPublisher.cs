using System.Collections.Concurrent;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>
/// Publishes finished items on a thread of its own: flushes the files of a staged item folder to disk and renames
/// the folder into place. Workers hand a folder over and go on with their next item instead of waiting for the
/// disk; a full queue makes them wait (bounded memory). The first failure (disk full, permissions) stops the
/// batch through <paramref name="stop"/> and is rethrown by the caller after <see cref="Finish"/>.
/// </summary>
internal sealed class BatchPublisher
{
    private readonly BlockingCollection<(string Stage, string Target)> _queue;
    private readonly Thread _thread;
    private readonly string _stagingRoot;
    private readonly CancellationTokenSource _stop;

    public BatchPublisher(string stagingRoot, int capacity, CancellationTokenSource stop)
    {
        _stagingRoot = stagingRoot;
        _stop = stop;
        _queue = new BlockingCollection<(string, string)>(capacity);
        _thread = new Thread(Loop) { IsBackground = true, Name = "orderunfold batch publisher" };
        _thread.Start();
    }

    public Exception? Failure { get; private set; }

    public void Add(string stage, string target) => _queue.Add((stage, target));

    /// <summary>No more items: publishes what is queued and waits for it.</summary>
    public void Finish()
    {
        _queue.CompleteAdding();
        _thread.Join();
        _queue.Dispose();
    }

    private void Loop()
    {
        foreach (var (stage, target) in _queue.GetConsumingEnumerable())
        {
            if (Failure is not null) continue; // keep taking items so no worker blocks on a full queue
            try
            {
                foreach (var file in Directory.EnumerateFiles(stage, "*", SearchOption.AllDirectories)) AtomicFile.FlushToDisk(file);
                Publish(stage, target, _stagingRoot);
            }
            catch (Exception e) when (e is IOException or UnauthorizedAccessException)
            {
                Failure = e;
                _stop.Cancel();
            }
        }
    }

    /// <summary>Moves a complete staging folder into place; an older folder of the same item is moved away first and then removed.</summary>
    public static void Publish(string stage, string target, string stagingRoot)
    {
        if (Directory.Exists(target))
        {
            var old = Path.Combine(stagingRoot, ".old-" + Guid.NewGuid().ToString("N"));
            Directory.Move(target, old);
            Directory.Move(stage, target);
            TryDelete(old);
        }
        else
        {
            Directory.Move(stage, target);
        }
    }

    internal static void TryDelete(string dir)
    {
        try
        {
            if (Directory.Exists(dir)) Directory.Delete(dir, recursive: true);
        }
        catch (IOException)
        {
            // another process of the same shard tag, or a file held open: left for the next run to remove
        }
    }
}
