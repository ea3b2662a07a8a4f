using OrderUnfold.Pipeline;
using OrderUnfold.Pipeline.Batch;
using OrderUnfold.Simulation;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Batch;

/// <summary>
/// A small SIMULATED archive (24 single-sweep items from <see cref="ArchiveSimulator"/>, four damaged on purpose,
/// a mode hop at item 15) plus two bad manifest rows, and one uninterrupted reference run with one job that
/// the other tests compare against.
/// </summary>
public sealed class BatchArchiveFixture : IDisposable
{
    public const int Items = 24;
    public const int HopAt = 14; // 0-based: sweep-0015 is the first item after the hop

    public BatchArchiveFixture()
    {
        Root = Path.Combine(Path.GetTempPath(), "ou-batch-" + Guid.NewGuid().ToString("N")[..8]);
        var spec = new ArchiveSpec
        {
            Items = Items,
            Laser = new ArchiveLaser { HopAt = HopAt, HopRampItems = 5 },
            Defects = new Dictionary<int, ArchiveDefect>
            {
                [3] = ArchiveDefect.EmptyFile,
                [8] = ArchiveDefect.Garbage,
                [11] = ArchiveDefect.MissingFile,
                [17] = ArchiveDefect.BadTimestamp,
            },
        };
        Archive = DemoArchive.Write(Path.Combine(Root, "archive"), spec);
        // two bad rows: an id that is not a safe folder name, and a repeated id
        File.AppendAllText(Archive.ManifestPath,
            "bad/id,setup.toml,sweeps/sweep-0001.csv,calibration.json,2025-03-14T10:00:00Z\n" +
            "sweep-0002,setup.toml,sweeps/sweep-0003.csv,calibration.json,2025-03-14T10:00:05Z\n");
        ReferenceDir = Path.Combine(Root, "reference");
        Reference = BatchRunner.Run(Archive.ManifestPath, ReferenceDir, new BatchOptions { Jobs = 1 });
        ReferenceSummary = File.ReadAllLines(Reference.SummaryPath);
    }

    public string Root { get; }
    public DemoArchiveOutput Archive { get; }
    public string ReferenceDir { get; }
    public BatchResult Reference { get; }
    public string[] ReferenceSummary { get; }

    public string NewDir(string name) => Path.Combine(Root, name + "-" + Guid.NewGuid().ToString("N")[..6]);

    public void Dispose()
    {
        try
        {
            Directory.Delete(Root, recursive: true);
        }
        catch (IOException)
        {
        }
    }
}

public class BatchTests(BatchArchiveFixture fx, ITestOutputHelper output) : IClassFixture<BatchArchiveFixture>
{
    /// <summary>The summary's rows without the timing column (the one column that differs between identical runs).</summary>
    private static SummaryRow[] NoTiming(string summaryPath) => SummaryTable.Read(summaryPath).Select(r => r.WithoutTiming()).ToArray();

    [Fact]
    public void ReferenceRunReportsCorruptItemsAndFinishesTheRest()
    {
        var rows = SummaryTable.Read(fx.Reference.SummaryPath).ToList();
        foreach (var l in fx.ReferenceSummary) output.WriteLine(l);
        Assert.Equal(BatchArchiveFixture.Items + 2, rows.Count);
        Assert.True(fx.Reference.Complete);
        var failed = rows.Where(r => r.Status == ItemStatus.Failed).ToDictionary(r => r.Id, r => r.Error!);
        Assert.Equal(new[] { "@line-0000028", "@line-0000029", "sweep-0004", "sweep-0009", "sweep-0012", "sweep-0018" }, failed.Keys.Order(StringComparer.Ordinal));
        Assert.Contains("sweep-0004.csv: the file is empty", failed["sweep-0004"]);
        Assert.Contains("sweep-0009.csv", failed["sweep-0009"]);
        Assert.Contains("sweep file not found", failed["sweep-0012"]);
        Assert.Contains("timestamp", failed["sweep-0018"]);
        Assert.Contains("not a safe folder name", failed["@line-0000028"]);
        Assert.Contains("duplicate id \"sweep-0002\"", failed["@line-0000029"]);
        Assert.Equal(20, fx.Reference.Ok);
        Assert.Equal(6, fx.Reference.Failed);

        // sorted by id, whatever order the items finished in
        var ids = rows.Select(r => r.Id).ToList();
        Assert.Equal(ids.Order(StringComparer.Ordinal), ids);
        foreach (var r in rows.Where(r => r.Status == ItemStatus.Ok))
        {
            var dir = BatchLayout.Item(fx.ReferenceDir, r.Id);
            Assert.True(File.Exists(Path.Combine(dir, OutputNames.Report)));
            Assert.True(File.Exists(Path.Combine(dir, OutputNames.Lines)));
            Assert.True(r.Lines >= 2, $"{r.Id}: {r.Lines} lines");
            Assert.NotNull(r.Timestamp);
            // the default item analysis (laser modes) fills the spacing where it can: the simulated modes are 410 MHz apart
            if (r.ModeSpacingHz is double spacing) Assert.InRange(spacing, 400e6, 420e6);
        }

        Assert.True(rows.Count(r => r.ModeSpacingHz is not null) >= rows.Count(r => r.Status == ItemStatus.Ok) / 2,
            "the mode analysis should give a spacing for most items");

        // a rejected row's stand-in id is guarded against formula injection in the file and reads back as its folder name
        Assert.Contains(fx.ReferenceSummary, l => l.StartsWith("'@line-0000028,failed,", StringComparison.Ordinal));
        Assert.True(Directory.Exists(BatchLayout.Item(fx.ReferenceDir, "@line-0000028")));

        // a failed item holds only its record
        Assert.Equal(new[] { BatchLayout.DoneFile }, Directory.GetFiles(BatchLayout.Item(fx.ReferenceDir, "sweep-0009")).Select(Path.GetFileName));
        Assert.False(Directory.Exists(Path.Combine(fx.ReferenceDir, BatchLayout.StagingFolder, "all")));
    }

    [Fact]
    public void StrongestLinePositionFollowsTheSimulatedLaser()
    {
        // the summary's strongest_line_hz is the strongest mode's position on the scan axis (modulo the FSR):
        // item-to-item changes must follow the simulated drift and the hop
        var truth = fx.Archive.Simulation.Items.ToDictionary(i => i.Id);
        var rows = SummaryTable.Read(fx.Reference.SummaryPath).Where(r => r.Status == ItemStatus.Ok && r.Id.StartsWith("sweep")).ToList();
        var fsr = new ArchiveSpec().Cavity.FsrHz;
        for (var i = 1; i < rows.Count; i++)
        {
            var measured = rows[i].StrongestLineHz!.Value - rows[i - 1].StrongestLineHz!.Value;
            measured -= Math.Round(measured / fsr) * fsr;
            var expected = truth[rows[i].Id].LasingPositionHz - truth[rows[i - 1].Id].LasingPositionHz;
            Assert.InRange(measured - expected, -2e6, 2e6);
        }
    }

    [Fact]
    public void OutputsDoNotDependOnTheNumberOfJobs()
    {
        var dir = fx.NewDir("jobs2");
        var r = BatchRunner.Run(fx.Archive.ManifestPath, dir, new BatchOptions { Jobs = 2 });
        Assert.Equal(NoTiming(fx.Reference.SummaryPath), NoTiming(r.SummaryPath));
        foreach (var item in Directory.GetDirectories(BatchLayout.Items(fx.ReferenceDir)))
        {
            var id = Path.GetFileName(item);
            foreach (var name in new[] { OutputNames.Lines, OutputNames.Spectrum })
            {
                var a = Path.Combine(item, name);
                if (!File.Exists(a)) continue;
                Assert.Equal(File.ReadAllBytes(a), File.ReadAllBytes(Path.Combine(BatchLayout.Item(dir, id), name)));
            }

            var reportA = Path.Combine(item, OutputNames.Report);
            if (File.Exists(reportA))
                Assert.Equal(WithoutCreated(reportA), WithoutCreated(Path.Combine(BatchLayout.Item(dir, id), OutputNames.Report)));
        }
    }

    private static string[] WithoutCreated(string path) => File.ReadAllLines(path).Where(l => !l.Contains("\"created_utc\"")).ToArray();

    [Fact]
    public void ResumeAfterAnInterruptionGivesTheSameSummary()
    {
        var dir = fx.NewDir("resume");
        using var cts = new CancellationTokenSource();
        var progress = new SyncProgress(p =>
        {
            if (p.Finished >= 7) cts.Cancel();
        });
        var first = BatchRunner.Run(fx.Archive.ManifestPath, dir, new BatchOptions { Jobs = 2 }, progress, cts.Token);
        Assert.False(first.Complete);
        var partial = File.ReadAllLines(first.SummaryPath);
        Assert.InRange(partial.Length - 1, 7, 7 + 2); // the items in flight finish
        Assert.False(BatchStatus.Read(BatchLayout.Status(dir, Shard.All)).Complete);

        // what a kill could leave behind: a half-written item in staging and an item folder without done.json
        var stale = Path.Combine(dir, BatchLayout.StagingFolder, "all", "sweep-0020");
        Directory.CreateDirectory(stale);
        File.WriteAllText(Path.Combine(stale, "lines.csv"), "frequency_hz,intens");
        var unfinished = BatchLayout.Item(dir, "sweep-0021");
        Directory.CreateDirectory(unfinished);
        File.WriteAllText(Path.Combine(unfinished, "lines.csv"), "frequency_hz,intens");

        var second = BatchRunner.Run(fx.Archive.ManifestPath, dir, new BatchOptions { Jobs = 1 });
        Assert.True(second.Complete);
        Assert.Equal(partial.Length - 1, second.Skipped);
        Assert.Equal(NoTiming(fx.Reference.SummaryPath), NoTiming(second.SummaryPath));
        Assert.False(Directory.Exists(stale));
        Assert.True(File.Exists(Path.Combine(unfinished, BatchLayout.DoneFile)));

        // a third run skips everything
        var third = BatchRunner.Run(fx.Archive.ManifestPath, dir, new BatchOptions { Jobs = 2 });
        Assert.Equal(third.Rows, third.Skipped);
        Assert.Equal(File.ReadAllLines(second.SummaryPath), File.ReadAllLines(third.SummaryPath));
    }

    [Fact]
    public void AnItemThatCannotBePublishedStopsTheBatchWithTheError()
    {
        // items are published (flushed and renamed into items/) on a thread of their own; when that fails — here a file
        // stands where an item's folder must go — the batch stops and reports the error instead of hanging or losing it
        var dir = fx.NewDir("publish-fails");
        Directory.CreateDirectory(BatchLayout.Items(dir));
        File.WriteAllText(BatchLayout.Item(dir, "sweep-0005"), "in the way");
        var e = Assert.ThrowsAny<IOException>(() => BatchRunner.Run(fx.Archive.ManifestPath, dir, new BatchOptions { Jobs = 2 }));
        output.WriteLine(e.Message);
        Assert.Equal("in the way", File.ReadAllText(BatchLayout.Item(dir, "sweep-0005")));
        Assert.True(File.Exists(Path.Combine(BatchLayout.Item(dir, "sweep-0001"), BatchLayout.DoneFile)));
    }

    [Fact]
    public void ChangedInputRunsTheItemAgain()
    {
        var dir = fx.NewDir("changed");
        var archive = Path.Combine(dir, "archive");
        CopyDirectory(Path.GetDirectoryName(fx.Archive.ManifestPath)!, archive);
        var manifest = Path.Combine(archive, "manifest.csv");
        var outDir = Path.Combine(dir, "out");
        BatchRunner.Run(manifest, outDir, new BatchOptions { Jobs = 2 });
        // the missing file appears (a copy of another sweep): that item's key changes, the rest are skipped
        File.Copy(Path.Combine(archive, "sweeps", "sweep-0011.csv"), Path.Combine(archive, "sweeps", "sweep-0012.csv"));
        var again = BatchRunner.Run(manifest, outDir, new BatchOptions { Jobs = 2 });
        Assert.Equal(again.Rows - 1, again.Skipped);
        var row = SummaryTable.Read(again.SummaryPath).Single(r => r.Id == "sweep-0012");
        Assert.Equal(ItemStatus.Ok, row.Status);
        // failed items are not retried while their inputs stay the same, unless asked
        var retry = BatchRunner.Run(manifest, outDir, new BatchOptions { Jobs = 2, RetryFailed = true });
        Assert.Equal(retry.Rows - retry.Failed, retry.Skipped);
    }

    [Fact]
    public void NoRefineIsPartOfTheKey()
    {
        var dir = fx.NewDir("norefine");
        var quick = BatchRunner.Run(fx.Archive.ManifestPath, dir, new BatchOptions { Jobs = 2, NoRefine = true });
        Assert.Equal(fx.Reference.Ok, quick.Ok);
        Assert.Contains("\"refinement\": null", File.ReadAllText(Path.Combine(BatchLayout.Item(dir, "sweep-0001"), OutputNames.Report)));
        Assert.DoesNotContain("\"refinement\": null", File.ReadAllText(Path.Combine(BatchLayout.Item(fx.ReferenceDir, "sweep-0001"), OutputNames.Report)));
        // the same folder without --no-refine: every item that ran is run again (failed rows fail before refinement matters, but their key changes too)
        var full = BatchRunner.Run(fx.Archive.ManifestPath, dir, new BatchOptions { Jobs = 2 });
        Assert.Equal(0, full.Skipped);
        Assert.Equal(NoTiming(fx.Reference.SummaryPath), NoTiming(full.SummaryPath));
    }

    [Fact]
    public void ShardsAreDisjointCompleteAndMergeToTheUnshardedSummary()
    {
        const int k = 3;
        var dir = fx.NewDir("shards");
        var seen = new List<string>();
        for (var i = 0; i < k; i++)
        {
            var r = BatchRunner.Run(fx.Archive.ManifestPath, dir, new BatchOptions { Jobs = 2, Shard = new Shard(i, k) });
            Assert.EndsWith($"shard-{i}-of-{k}.csv", r.SummaryPath);
            var ids = SummaryTable.Read(r.SummaryPath).Select(row => row.Id).ToList();
            Assert.NotEmpty(ids);
            Assert.Empty(seen.Intersect(ids));
            seen.AddRange(ids);
        }

        Assert.Equal(SummaryTable.Read(fx.Reference.SummaryPath).Select(r => r.Id).Order(StringComparer.Ordinal), seen.Order(StringComparer.Ordinal));
        Assert.False(File.Exists(Path.Combine(dir, BatchLayout.SummaryFile)));
        var merged = BatchMerge.Run([dir]);
        Assert.Equal(fx.ReferenceSummary.Length - 1, merged.Rows);
        Assert.Equal(NoTiming(fx.Reference.SummaryPath), NoTiming(merged.SummaryPath));

        // the same merge from shards in separate folders copies the items
        var separate = Enumerable.Range(0, k).Select(i => fx.NewDir($"shard{i}")).ToList();
        for (var i = 0; i < k; i++)
            BatchRunner.Run(fx.Archive.ManifestPath, separate[i], new BatchOptions { Jobs = 2, Shard = new Shard(i, k) });
        var outDir = fx.NewDir("merged");
        var m2 = BatchMerge.Run(separate, outDir);
        Assert.Equal(NoTiming(fx.Reference.SummaryPath), NoTiming(m2.SummaryPath));
        Assert.Equal(fx.ReferenceSummary.Length - 1, m2.CopiedItems);
        Assert.True(File.Exists(Path.Combine(BatchLayout.Item(outDir, "sweep-0001"), OutputNames.Lines)));

        // a missing shard is refused
        var e = Assert.Throws<InputException>(() => BatchMerge.Run(separate.Take(2).ToList(), fx.NewDir("incomplete")));
        Assert.Contains("2/3", e.Message);
    }

    [Fact]
    public void ShardOfAnIdIsStable()
    {
        // FNV-1a 64-bit test vectors from the FNV reference (Fowler, Noll, Vo; IETF draft-eastlake-fnv, test suite):
        // "" → 0xcbf29ce484222325, "a" → 0xaf63dc4c8601ec8c, "foobar" → 0x85944171f73967e8
        Assert.Equal(0xcbf29ce484222325UL, ItemId.StableHash(""));
        Assert.Equal(0xaf63dc4c8601ec8cUL, ItemId.StableHash("a"));
        Assert.Equal(0x85944171f73967e8UL, ItemId.StableHash("foobar"));
        var ids = Enumerable.Range(0, 2000).Select(i => $"item-{i}").ToList();
        for (var n = 1; n <= 5; n++)
            foreach (var id in ids)
                Assert.Equal(1, Enumerable.Range(0, n).Count(i => new Shard(i, n).Contains(id)));
        Assert.Equal(new Shard(2, 8), Shard.Parse("2/8"));
        Assert.Throws<InputException>(() => Shard.Parse("8/8"));
        Assert.Throws<InputException>(() => Shard.Parse("1/0"));
        Assert.Throws<InputException>(() => Shard.Parse("x"));
    }

    [Fact]
    public void TrackFindsTheModeHopAndTheDrift()
    {
        var outDir = fx.NewDir("track");
        var r = LineTracker.Run(fx.ReferenceDir, outDir, new TrackOptions { Figures = new OrderUnfold.Plotting.FigureWriter() });
        foreach (var w in r.Warnings) output.WriteLine(w);
        foreach (var t in r.Tracks) output.WriteLine(t.ToString());
        var hop = Assert.Single(r.Hops);
        Assert.Equal("sweep-0015", hop.ToId);
        Assert.Equal("sweep-0014", hop.FromId);
        var spacing = new ArchiveSpec().Laser.ModeSpacingHz;
        Assert.InRange(hop.JumpHz, spacing - 5e6, spacing + 5e6);
        // the lasing mode's track before the hop: drift positive, of the simulated order (20 kHz/s plus a random walk)
        var main = r.Tracks.Single(t => t.Track == r.Points.First(p => p.Strongest).Track);
        Assert.InRange(main.DriftHzPerS!.Value, 0, 60e3);
        foreach (var name in new[] { "track.csv", "tracks.csv", "hops.csv", "series.csv", "track.png", "smsr.png" })
            Assert.True(File.Exists(Path.Combine(outDir, name)), name);
        // the track files read back, through the same row types, as the records the run returned
        Assert.Equal(r.Points, OrderUnfold.Io.CsvTable.Read<TrackPoint>(Path.Combine(outDir, "track.csv"), "track table"));
        Assert.Equal(r.Tracks, OrderUnfold.Io.CsvTable.Read<TrackSummary>(Path.Combine(outDir, "tracks.csv"), "track list"));
        Assert.Equal(r.Hops, OrderUnfold.Io.CsvTable.Read<ModeHop>(Path.Combine(outDir, "hops.csv"), "hop list"));
        Assert.Equal(r.Series, OrderUnfold.Io.CsvTable.Read<SeriesPoint>(Path.Combine(outDir, "series.csv"), "series table"));
        Assert.StartsWith("time_s,timestamp,id,lines,strongest_hz,smsr_db,smsr_source,mode_spacing_hz,hop\n", File.ReadAllText(Path.Combine(outDir, "series.csv")));
        // SMSR falls towards the hop (the simulated neighbour grows)
        var smsr = r.Series.Where(s => s.SmsrDb is not null).ToDictionary(s => s.Id, s => s.SmsrDb!.Value);
        Assert.True(smsr["sweep-0014"] < smsr["sweep-0002"] - 8, $"{smsr["sweep-0014"]} vs {smsr["sweep-0002"]}");
    }

    [Fact]
    public void ManifestIsStreamed()
    {
        // a manifest of 100 000 rows: taking the first rows reads only the first lines
        var pulled = 0;
        IEnumerable<string> Lines()
        {
            pulled++;
            yield return "id,files,timestamp";
            for (var i = 0; i < 100_000; i++)
            {
                pulled++;
                yield return $"row-{i:D6},missing-{i}.csv,2025-01-01T00:00:00Z";
            }
        }

        var first = Manifest.ReadLines("m.csv", Lines()).Take(10).ToList();
        Assert.Equal(10, first.Count);
        Assert.InRange(pulled, 11, 12);
        pulled = 0;
        Assert.Equal(100_000, Manifest.ReadLines("m.csv", Lines()).LongCount());
    }

    [Fact]
    public void LargeManifestOfFailingItemsRuns()
    {
        // 3 000 rows whose files do not exist: every one fails, with its error, and the batch finishes
        var dir = fx.NewDir("many");
        Directory.CreateDirectory(dir);
        var manifest = Path.Combine(dir, "manifest.csv");
        using (var w = new StreamWriter(manifest))
        {
            w.WriteLine("id,setup,files,calibration");
            for (var i = 0; i < 3000; i++) w.WriteLine($"row-{i:D5},{fx.Archive.Simulation.SetupPath},nothing-{i}.csv,{fx.Archive.CalibrationPath}");
        }

        var before = GC.GetTotalMemory(true);
        // the rows name a setup and a calibration in another folder: allowed explicitly (--allow-outside-paths)
        using var outside = OrderUnfold.Io.InputLimits.Use(new OrderUnfold.Io.InputLimits { AllowOutsidePaths = true });
        var r = BatchRunner.Run(manifest, Path.Combine(dir, "out"), new BatchOptions { Jobs = 2 });
        var after = GC.GetTotalMemory(true);
        output.WriteLine($"3000 failing rows in {r.Elapsed.TotalSeconds:F1} s; managed memory {before / 1e6:F1} → {after / 1e6:F1} MB");
        Assert.Equal(3000, r.Failed);
        Assert.Equal(3001, File.ReadLines(r.SummaryPath).Count());
        Assert.Contains("sweep file not found", File.ReadLines(r.SummaryPath).Skip(1).First());
    }

    [Fact]
    public void BadRowsBecomeFailedItems()
    {
        var rows = Manifest.ReadLines("m.csv",
        [
            "# comment",
            "ID, Files ,timestamp",
            "",
            "ok-1,a.csv;b.csv,2025-03-14T09:00:05+01:00",
            "\"quoted,1\",a.csv,",
            "con,a.csv,",
            "x2,a.csv;;b.csv,",
            "x3,\"a.csv,2025",
            "x4,a.csv,2025-03-14,extra",
            "x5,a.csv,yesterday",
        ]).ToList();
        Assert.Equal(7, rows.Count);
        Assert.Null(rows[0].Problem);
        Assert.Equal(new[] { "a.csv", "b.csv" }, rows[0].Files);
        Assert.Equal("2025-03-14T08:00:05Z", rows[0].Timestamp);
        Assert.Equal(4, rows[0].Line);
        Assert.False(rows[1].IdAccepted);
        Assert.Contains("','", rows[1].Problem);
        Assert.Contains("reserved", rows[2].Problem);
        Assert.Contains("empty entry", rows[3].Problem);
        Assert.Contains("not closed", rows[4].Problem);
        Assert.Contains("4 fields", rows[5].Problem);
        Assert.Contains("yesterday", rows[6].Problem);
        Assert.True(rows[6].IdAccepted);
        Assert.Equal("@line-0000008", rows[4].Folder);

        Assert.Throws<InputException>(() => Manifest.ReadLines("m.csv", ["files,timestamp", "a,b"]).ToList());
        Assert.Throws<InputException>(() => Manifest.ReadLines("m.csv", ["id,file"]).ToList());
        Assert.Throws<InputException>(() => Manifest.ReadLines("m.csv", ["# nothing"]).ToList());
    }

    [Fact]
    public void CommandLineExitCodes()
    {
        var o = new StringWriter();
        var e = new StringWriter();
        int Cli(params string[] args) => OrderUnfold.Cli.Cli.Run(args, o, e);

        Assert.Equal(2, Cli("batch", Path.Combine(fx.Root, "no-such.csv"), "--out", fx.NewDir("x")));
        Assert.Contains("manifest not found", e.ToString());
        var bad = Path.Combine(fx.Root, "bad-header.csv");
        File.WriteAllText(bad, "id,sweeps\nA,b.csv\n");
        Assert.Equal(2, Cli("batch", bad, "--out", fx.NewDir("x")));
        Assert.Contains("unknown column \"sweeps\"", e.ToString());
        Assert.Equal(2, Cli("batch", fx.Archive.ManifestPath, "--out", fx.NewDir("x"), "--shard", "3/3"));
        Assert.Equal(2, Cli("batch", fx.Archive.ManifestPath));

        // some items fail: exit 1; merge of no shards: exit 2; track: exit 0
        var dir = fx.NewDir("cli");
        Assert.Equal(1, Cli("batch", fx.Archive.ManifestPath, "--out", dir, "--jobs", "2", "--quiet"));
        Assert.Contains("20 ok, 6 failed", o.ToString());
        Assert.Equal(2, Cli("merge", dir));
        Assert.Equal(0, Cli("track", dir, "--no-plots", "--tolerance", "15 MHz"));
        Assert.Contains("1 mode hop", o.ToString());
        Assert.Equal(2, Cli("track", dir, "--tolerance", "15"));
    }

    [Fact]
    public void CsvFieldsRoundTrip()
    {
        string[] values = ["plain", "with,comma", "with \"quote\"", "", " padded ", "multi\nline"];
        var line = CsvLine.Join(values);
        Assert.True(CsvLine.TrySplit(line, out var back, out _));
        Assert.Equal(new[] { "plain", "with,comma", "with \"quote\"", "", " padded ", "multi line" }, back);
        Assert.True(CsvLine.TrySplit("a,,b,", out var f, out _));
        Assert.Equal(new[] { "a", "", "b", "" }, f);
    }

    private static void CopyDirectory(string from, string to)
    {
        Directory.CreateDirectory(to);
        foreach (var f in Directory.GetFiles(from)) File.Copy(f, Path.Combine(to, Path.GetFileName(f)));
        foreach (var d in Directory.GetDirectories(from)) CopyDirectory(d, Path.Combine(to, Path.GetFileName(d)));
    }

    /// <summary>Progress delivered on the reporting thread (Progress&lt;T&gt; would post to the thread pool).</summary>
    private sealed class SyncProgress(Action<BatchProgress> action) : IProgress<BatchProgress>
    {
        public void Report(BatchProgress value) => action(value);
    }
}
