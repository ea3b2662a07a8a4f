using OrderUnfold.Pipeline.Batch;
using Xunit;

namespace OrderUnfold.Tests.Batch;

/// <summary>done.json and batch.json go through typed records (<see cref="ItemRecord"/>, <see cref="BatchStatusFile"/>)
/// like every other JSON output.</summary>
public sealed class BatchJsonFilesTests : IDisposable
{
    private readonly string _dir = Directory.CreateTempSubdirectory("ou-batchjson-").FullName;

    public void Dispose() => Directory.Delete(_dir, true);

    [Fact]
    public void An_item_record_reads_back_field_for_field()
    {
        var record = new ItemRecord
        {
            Id = "sweep-0001", Key = new string('a', 64), Status = ItemStatus.Ok, ManifestLine = 7, Timestamp = "2026-12-05T04:00:00Z",
            Lines = 3, StrongestLineHz = 1.25e8, FrameFsrHz = double.NaN, OrdersResolved = false, ReducedChi2 = 1.02, Warnings = 1,
            Seconds = 0.123456789, Error = null, Analysis = new Dictionary<string, string> { ["smsr_db"] = "31.5", ["modes"] = "2" },
        };
        var json = record.ToJson();
        var back = ItemRecord.Parse(json);
        Assert.Equal(record.Id, back.Id);
        Assert.Equal(record.Key, back.Key);
        Assert.Equal(record.Status, back.Status);
        Assert.Equal(record.ManifestLine, back.ManifestLine);
        Assert.Equal(record.Lines, back.Lines);
        Assert.Equal(record.StrongestLineHz, back.StrongestLineHz);
        Assert.Null(back.FrameFsrHz); // NaN is never written: null
        Assert.Equal(0.1235, back.Seconds);
        Assert.Equal(["modes", "smsr_db"], back.Analysis.Keys.Order(StringComparer.Ordinal));
        Assert.Contains("\"status\": \"ok\"", json);
        Assert.StartsWith("{\n  \"format\": \"orderunfold-batch-item\",\n  \"version\": 1,", json.Replace("\r\n", "\n"));
    }

    [Fact]
    public void A_record_of_another_format_or_version_is_not_a_finished_item()
    {
        var path = Path.Combine(_dir, "done.json");
        File.WriteAllText(path, "{\"format\": \"orderunfold-batch-item\", \"version\": 2, \"id\": \"x\", \"key\": \"k\", \"status\": \"ok\"}");
        Assert.Null(ItemRecord.TryRead(path));
        File.WriteAllText(path, "{\"format\": \"orderunfold-batch-item\", \"version\": 1, \"id\": \"x\", \"key\": \"k\", \"status\": \"fine\"}");
        Assert.Null(ItemRecord.TryRead(path));
    }

    [Fact]
    public void A_status_file_reads_back_and_a_damaged_one_names_its_line_and_column()
    {
        var path = Path.Combine(_dir, "batch.json");
        var status = new BatchStatus(new Shard(1, 4), true, "manifest.csv", new string('b', 64), "0.1.0+abc", 10, 8, 2, 3);
        status.Write(path);
        Assert.Equal(status, BatchStatus.Read(path));

        File.WriteAllText(path, File.ReadAllText(path).Replace("\"rows\": 10", "\"rows\": \"ten\""));
        var e = Assert.Throws<InputException>(() => BatchStatus.Read(path));
        Assert.Equal(path, e.File);
        Assert.True(e.Line > 1 && e.Column > 1, $"line {e.Line}, column {e.Column}");
        Assert.Contains("rows", e.Message);
    }
}
