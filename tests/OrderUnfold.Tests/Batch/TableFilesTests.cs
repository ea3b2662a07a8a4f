using OrderUnfold.Io;
using OrderUnfold.Pipeline.Batch;
using Xunit;

namespace OrderUnfold.Tests.Batch;

/// <summary>
/// The typed tables (summary.csv here; the track files and plan.csv in the batch and plan tests): what is written reads
/// back as the same records, and a damaged table is refused with its file, line and column. The rows are invented.
/// </summary>
public sealed class TableFilesTests : IDisposable
{
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "ou-tables-" + Guid.NewGuid().ToString("N")[..8]);

    public TableFilesTests() => Directory.CreateDirectory(_dir);

    public void Dispose()
    {
        try
        {
            Directory.Delete(_dir, recursive: true);
        }
        catch (IOException)
        {
        }
    }

    private static readonly SummaryRow[] Rows =
    [
        new()
        {
            Id = "a-1", Status = ItemStatus.Ok, Timestamp = "2025-03-14T09:00:05Z", Lines = 3, StrongestLineHz = 1.0 / 3 * 1e9, ModeSpacingHz = 410e6 + 0.1,
            SmsrDb = -2.5e-7, ReducedChi2 = 1.0000000000000002, Warnings = 2, Seconds = 0.125,
        },
        new() { Id = "@line-0000028", Status = ItemStatus.Failed, Warnings = 0, Seconds = 0, Error = "=HYPERLINK(\"x\"), then\na second line" },
        new() { Id = "b", Status = ItemStatus.Failed, Error = "'=already guarded-looking text", Seconds = 1 },
        new() { Id = "c", Status = ItemStatus.Ok, StrongestLineHz = double.NaN, Error = "-12.5", Seconds = 2 },
    ];

    private string WriteSummary(string text)
    {
        var path = Path.Combine(_dir, Guid.NewGuid().ToString("N") + ".csv");
        File.WriteAllText(path, text);
        return path;
    }

    [Fact]
    public void SummaryRowsReadBackAsWritten()
    {
        var path = Path.Combine(_dir, "summary.csv");
        SummaryTable.Write(path, Rows);
        var text = File.ReadAllText(path);
        Assert.StartsWith("id,status,timestamp,lines,strongest_line_hz,mode_spacing_hz,smsr_db,reduced_chi2,warnings,seconds,error\n", text);
        // formula guard on text cells, not on numbers; one record per line
        Assert.Contains("\n'@line-0000028,failed,", text);
        Assert.Contains(",\"'=HYPERLINK(\"\"x\"\"), then a second line\"\n", text);
        Assert.Contains(",-12.5\n", text);
        Assert.Equal(Rows.Length + 1, File.ReadAllLines(path).Length);

        var back = SummaryTable.Read(path).ToList();
        var expected = Rows.Select(r => r with
        {
            Error = r.Error?.Replace('\n', ' '), // line breaks become spaces
            StrongestLineHz = r.StrongestLineHz is double v && double.IsFinite(v) ? v : null, // non-finite numbers are written empty
        });
        Assert.Equal(expected, back);
    }

    [Theory]
    [InlineData("id,status,timestamp,lines,strongest_line_hz,mode_spacing_hz,smsr_db,reduced_chi2,warnings,seconds,error\nx,ok,,two,,,,,0,0.1,\n", 2, 4, "whole number")]
    [InlineData("id,status,timestamp,lines,strongest_line_hz,mode_spacing_hz,smsr_db,reduced_chi2,warnings,seconds,error\nx,fine,,2,,,,,0,0.1,\n", 2, 2, "ok, failed")]
    [InlineData("id,status,timestamp,lines,strongest_line_hz,mode_spacing_hz,smsr_db,reduced_chi2,warnings,seconds,error\nx,ok,,2,1,2,3,4,0,0.1,\ny,ok,,2,1,2,3,4,0,1\n", 3, null, "11")]
    [InlineData("id,status,timestamp,lines,strongest_line_hz,mode_spacing_hz,smsr_db,reduced_chi2,warnings,seconds,error\nx,ok,,2,\"1,5,,,,0,0.1,\n", 2, null, "")]
    [InlineData("id,status,timestamp,lines,strongest_line_hz,mode_spacing_hz,smsr_db,reduced_chi_square,warnings,seconds,error\n", 1, 8, "reduced_chi2")]
    [InlineData("id,status\n", 1, 3, "timestamp")]
    [InlineData("", 1, null, "empty")]
    public void DamagedSummaryIsRefusedWithFileLineAndColumn(string text, int line, int? column, string expected)
    {
        var path = WriteSummary(text);
        var e = Assert.Throws<InputException>(() => SummaryTable.Read(path).ToList());
        Assert.Equal(path, e.File);
        Assert.Equal(line, e.Line);
        Assert.Equal(column, e.Column);
        Assert.Contains(expected, e.Message);
    }

    [Theory]
    [InlineData("=1+2")]
    [InlineData("'=1+2")]
    [InlineData("''=1+2")]
    [InlineData("'plain")]
    [InlineData("-1.5e9")]
    [InlineData("'-1.5e9")]
    [InlineData("@line-0000028")]
    [InlineData("'")]
    public void FormulaGuardIsUndoneExactly(string text)
    {
        var cell = CsvCell.Guard(text);
        Assert.False(cell.Length > 0 && cell[0] is '=' or '+' or '@' && !double.TryParse(cell, out _), cell);
        Assert.Equal(text, CsvCell.Unguard(cell));
    }
}
