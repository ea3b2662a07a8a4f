using OrderUnfold.Analysis.Modes;
using Xunit;

namespace OrderUnfold.Tests.Analysis.Modes;

/// <summary>Reading lines.csv and report.json from a result folder (files written by the tests, simulated values).</summary>
public sealed class ModeInputReaderTests : IDisposable
{
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-modes-read-" + Guid.NewGuid().ToString("N"));

    public ModeInputReaderTests() => Directory.CreateDirectory(_dir);

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); } catch (IOException) { }
    }

    private string LinesPath => Path.Combine(_dir, "lines.csv");

    private void Write(string lines, string? report = null)
    {
        File.WriteAllText(LinesPath, lines);
        if (report is not null) File.WriteAllText(Path.Combine(_dir, "report.json"), report);
    }

    private InputException Fails() => Assert.Throws<InputException>(() => ModeInputReader.FromResultDirectory(_dir));

    [Fact]
    public void ReadsColumnsByName_WithEmptyOptionalCellsAndExtraColumns()
    {
        Write("label,intensity,frequency_hz,snr,frequency_sigma_hz,intensity_sigma\r\n" +
              "A,1.0,0,250,1.5e6,0.01\r\n" +
              "B, 0.25 ,4.1e10,,2e6,\r\n" +
              "\r\n" +
              "C,0.01,-4.1e10,3.2,,0.002\r\n",
            """
            {
              "version": 1,
              "solver": { "detection_limit": 0.5, "iterations": 270 },
              "detection_limit": 1e-3,
              "orders_resolved": true,
              "anchor_frequency_hz": 473.612e12,
              "notes": ["written by hand"]
            }
            """);
        var input = ModeInputReader.FromResultDirectory(_dir);
        Assert.Equal(3, input.Lines.Count);
        Assert.Equal(new ModeInputLine(0, 1.5e6, 1.0, 0.01, 250), input.Lines[0]);
        Assert.Equal(new ModeInputLine(4.1e10, 2e6, 0.25, null, null), input.Lines[1]);
        Assert.Equal(new ModeInputLine(-4.1e10, null, 0.01, 0.002, 3.2), input.Lines[2]);
        Assert.Equal(1e-3, input.DetectionLimit);
        Assert.True(input.OrdersResolved);
        Assert.Null(input.FoldingFsrHz);
        Assert.Equal(473.612e12, input.AbsoluteAnchorHz);
    }

    [Fact]
    public void WithoutReport_OrdersAreResolvedAndNoLimitIsKnown()
    {
        Write("frequency_hz,intensity\n0,1\n5e8,0.3\n");
        var input = ModeInputReader.FromResultDirectory(_dir);
        Assert.True(input.OrdersResolved);
        Assert.Null(input.DetectionLimit);
        Assert.Null(input.AbsoluteAnchorHz);
        Assert.Equal(0.3, input.Lines[1].Intensity);
        Assert.Null(input.Lines[1].FrequencySigmaHz);
    }

    [Fact]
    public void FoldedReport_IsRead()
    {
        Write("frequency_hz,intensity\n0.2e9,1\n0.9e9,0.3\n", """{"orders_resolved": false, "folding_fsr_hz": 1.5e9, "detection_limit": null}""");
        var input = ModeInputReader.FromResultDirectory(_dir);
        Assert.False(input.OrdersResolved);
        Assert.Equal(1.5e9, input.FoldingFsrHz);
        Assert.Null(input.DetectionLimit);
    }

    [Fact]
    public void MissingFolderOrFile_NamesIt()
    {
        var e = Assert.Throws<InputException>(() => ModeInputReader.FromResultDirectory(Path.Combine(_dir, "nope")));
        Assert.Contains("does not exist", e.Message);
        e = Fails();
        Assert.Contains("lines.csv", e.Message);
        Assert.Equal(_dir, e.File);
    }

    [Fact]
    public void MissingRequiredColumn_PointsAtTheHeader()
    {
        Write("frequency_hz,power\n0,1\n");
        var e = Fails();
        Assert.Equal(LinesPath, e.File);
        Assert.Equal(1, e.Line);
        Assert.Contains("\"intensity\"", e.Message);
        Assert.Contains("\"power\"", e.Message);
    }

    [Fact]
    public void BadNumber_GivesLineAndColumn()
    {
        Write("frequency_hz,intensity\n0,1\n4e10,abc\n");
        var e = Fails();
        Assert.Equal((LinesPath, 3, 2), (e.File, e.Line, e.Column));
        Assert.Equal("expected a finite number in column 2 (\"intensity\") but got \"abc\"", e.Message);
        Assert.StartsWith($"{LinesPath}:3:2: ", e.Located);
    }

    [Theory]
    [InlineData("frequency_hz,intensity\n0,1\n,0.5\n", 3, 1, "the cell is empty")]
    [InlineData("frequency_hz,intensity\n0,1\n4e10,nan\n", 3, 2, "\"nan\"")]
    [InlineData("frequency_hz,intensity,frequency_sigma_hz\n0,1,-3\n", 2, 3, "cannot be negative")]
    [InlineData("frequency_hz,intensity\n", 1, null, "no lines")]
    [InlineData("", 1, null, "empty")]
    [InlineData("frequency_hz,intensity,intensity\n0,1,1\n", 1, 3, "appears twice")]
    public void BadLines_AreLocated(string text, int line, int? column, string fragment)
    {
        Write(text);
        var e = Fails();
        Assert.Equal(line, e.Line);
        Assert.Equal(column, e.Column);
        Assert.Contains(fragment, e.Message);
    }

    [Fact]
    public void NoPositiveIntensity_IsBadInput()
    {
        Write("frequency_hz,intensity\n0,0\n1e9,-1\n");
        var e = Fails();
        Assert.Contains("positive intensity", e.Message);
        Assert.Equal(LinesPath, e.File);
    }

    [Fact]
    public void ReportWithWrongType_PointsAtTheValue()
    {
        Write("frequency_hz,intensity\n0,1\n", "{\n  \"detection_limit\": \"1e-3\"\n}\n");
        var e = Fails();
        Assert.Equal(Path.Combine(_dir, "report.json"), e.File);
        Assert.Equal(2, e.Line);
        Assert.Equal(22, e.Column);
        Assert.Equal("expected a number for \"detection_limit\"", e.Message);
    }

    [Theory]
    [InlineData("{\"detection_limit\": 0}", "(0, 1]")]
    [InlineData("{\"detection_limit\": 3}", "(0, 1]")]
    [InlineData("{\"orders_resolved\": \"no\"}", "true or false")]
    [InlineData("{\"orders_resolved\": false}", "folding_fsr_hz")]
    [InlineData("{\"folding_fsr_hz\": -1}", "positive")]
    [InlineData("[1, 2]", "JSON object")]
    [InlineData("{\"schema_version\": 3}", "newer version")]
    [InlineData("{\"lines\": [{\"order_verdict\": \"sure\"}]}", "lines[0].order_verdict")]
    [InlineData("{\"detection_limit\": 0.1,", "not valid JSON")]
    public void BadReports_AreInputErrors(string json, string fragment)
    {
        Write("frequency_hz,intensity\n0,1\n", json);
        var e = Fails();
        Assert.Contains(fragment, e.Message);
        Assert.Equal(Path.Combine(_dir, "report.json"), e.File);
        Assert.NotNull(e.Line);
    }
}
