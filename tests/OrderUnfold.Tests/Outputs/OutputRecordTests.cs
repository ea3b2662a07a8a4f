using OrderUnfold.Analysis;
using OrderUnfold.Analysis.Modes;
using OrderUnfold.Calibration;
using OrderUnfold.Inversion;
using OrderUnfold.Outputs;
using Xunit;

namespace OrderUnfold.Tests.Outputs;

/// <summary>The output records: writers and readers share them, tables keep their number formatting, optional columns
/// and formula guard, and the order verdict has one source. All values are simulated (hand-made records).</summary>
public sealed class OutputRecordTests : IDisposable
{
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-outputs-" + Guid.NewGuid().ToString("N"));

    public OutputRecordTests() => Directory.CreateDirectory(_dir);

    public void Dispose()
    {
        try { Directory.Delete(_dir, recursive: true); } catch (IOException) { }
    }

    private static ReportLine Line(double frequencyHz, OrderVerdict verdict, double? fwhm = null) => new(
        frequencyHz, 1.5e4, 1.2e4, null, null, null, 0.1 + 0.2, 0.001, 250, fwhm, fwhm is null ? null : 1e3, verdict, -1.5e9, 3.2e4, null);

    private static UnfoldReport Report(params ReportLine[] lines) => new(
        UnfoldReport.CurrentSchemaVersion, "orderunfold", "0.1.0", "2026-12-05T00:00:00Z", "relative to the anchor (strongest) line, Hz",
        [new InputFileRecord("sweep", "/data/a.csv", 1234, "00ff")], [], [], null, null, 0.71,
        [new SweepFitRecord("A", "A", 1000, 0, 1, 0.01, 0.002, new NoiseRecord(0.002, null, 0.1, "mad"), 700, 0.71, 0.002)],
        null, 1e-3, true, null, null, "statement", lines, [new OffsetTrialRecord("A", 1e6, 700, true)], ["a warning ≥ 3"], [], null);

    [Fact]
    public void Report_ReadsBackThroughTheSameRecord_ToTheSameText()
    {
        var text = OutputJson.Serialize(Report(Line(0, OrderVerdict.Secure), Line(3.7e8, OrderVerdict.Unchecked)), c => c.UnfoldReport);
        var back = OutputJson.Deserialize("report.json", System.Text.Encoding.UTF8.GetBytes(text), c => c.UnfoldReport, "report");
        Assert.Equal(text, OutputJson.Serialize(back, c => c.UnfoldReport));
        Assert.Equal(OrderVerdict.Unchecked, back.Lines[1].OrderVerdict);
        Assert.Contains("\"schema_version\": 2", text);
        Assert.Contains("\"reduced_chi2\": 0.71", text);
        Assert.Contains("\"order_verdict\": \"unchecked\"", text);
        Assert.Contains("≥", text);
        Assert.DoesNotContain("chi_square", text);
    }

    [Fact]
    public void Report_WithAWrongVerdict_NamesTheFieldAndTheAllowedValues()
    {
        var text = OutputJson.Serialize(Report(Line(0, OrderVerdict.Secure)), c => c.UnfoldReport).Replace("\"secure\"", "\"certain\"");
        var e = Assert.Throws<InputException>(() =>
            OutputJson.Deserialize("report.json", System.Text.Encoding.UTF8.GetBytes(text), c => c.UnfoldReport, "report"));
        Assert.Equal("expected one of \"secure\", \"doubtful\", \"unknown\", \"unchecked\" for \"lines[0].order_verdict\"", e.Message);
        Assert.Equal("report.json", e.File);
        var line = text.Split('\n').ToList().FindIndex(l => l.Contains("certain")) + 1;
        Assert.Equal(line, e.Line);
    }

    [Fact]
    public void LinesCsv_HasOptionalColumnsOnlyWhenTheyApply_AndRoundTripNumbers()
    {
        var rows = new[] { Line(0, OrderVerdict.Secure), Line(-2.87e9, OrderVerdict.Doubtful) with { FrequencySigmaHz = double.NaN } };
        var plain = OutputCsv.Write(rows, new LineColumns(widths: false, absolute: false)).Split('\n');
        Assert.Equal("frequency_hz,frequency_sigma_hz,frequency_crb_hz,frequency_axis_sigma_hz,intensity,intensity_sigma,snr,order_verdict,alias_shift_hz,alias_delta_chi2", plain[0]);
        Assert.Equal("0,15000,12000,,0.30000000000000004,0.001,250,secure,-1500000000,32000", plain[1]);
        Assert.Equal("-2870000000,,12000,,0.30000000000000004,0.001,250,doubtful,-1500000000,32000", plain[2]);
        Assert.Equal("", plain[3]);
        Assert.Equal(0.1 + 0.2, double.Parse(plain[1].Split(',')[4], System.Globalization.CultureInfo.InvariantCulture));

        var full = OutputCsv.Write(rows, new LineColumns(widths: true, absolute: true)).Split('\n')[0];
        Assert.Equal("frequency_hz,frequency_sigma_hz,frequency_crb_hz,frequency_axis_sigma_hz,intensity,intensity_sigma,snr,fwhm_hz,fwhm_sigma_hz,order_verdict,alias_shift_hz,alias_delta_chi2,absolute_frequency_hz", full);
    }

    [Fact]
    public void TextCells_AreGuardedAgainstFormulas_AndQuotedWhenNeeded()
    {
        var rows = new[] { new ModeRow(0, "=HYPERLINK(\"x\")", 1, null, 0, null, null, null, null, 1, null), new ModeRow(-1, "off-comb, weak", -2e9, null, -30, null, null, null, null, 1e-3, null) };
        var lines = OutputCsv.Write(rows, new ModeRowColumns()).Split('\n');
        Assert.Equal("0,\"'=HYPERLINK(\"\"x\"\")\",1,,0,,,,,1,", lines[1]);
        Assert.Equal("-1,\"off-comb, weak\",-2000000000,,-30,,,,,0.001,", lines[2]);
    }

    [Fact]
    public void OrderVerdict_HasOneSource()
    {
        var secure = new UnfoldedLine(0, 1, 1, 100, 0, 0) { Verdict = OrderVerdict.Secure };
        var doubtful = secure with { Verdict = OrderVerdict.Doubtful };
        var notChecked = secure with { Verdict = OrderVerdict.Unknown };
        UnfoldResult Result(bool resolved, bool refined) => new()
        {
            Grid = new FrequencyGrid(0, 1e6, 4), Spectrum = new double[4], Lines = [secure, doubtful, notChecked], Sweeps = [],
            Solver = new NnlsResult(new double[4], 0, 0, SolverStatus.Converged, "hand-built (test)", 0, 0),
            OrdersResolved = resolved, Refined = refined,
        };

        Assert.True(doubtful.Doubtful);
        Assert.False(secure.Doubtful);
        var refined = Result(resolved: true, refined: true);
        Assert.Equal([OrderVerdict.Secure, OrderVerdict.Doubtful, OrderVerdict.Unchecked], refined.Lines.Select(refined.OrderVerdictOf));
        var grid = Result(resolved: true, refined: false);
        Assert.All(grid.Lines, l => Assert.Equal(OrderVerdict.Unchecked, grid.OrderVerdictOf(l)));
        var folded = Result(resolved: false, refined: true);
        Assert.All(folded.Lines, l => Assert.Equal(OrderVerdict.Unknown, folded.OrderVerdictOf(l)));
    }

    [Fact]
    public void CalibrationFile_ReadsVersion1Files_AndRefusesOthersWithTheFile()
    {
        var inst = new Instrument("A", 1.5e9, 100, CavityGeometry.Planar, 0.1, 1.0);
        var axis = new AxisCalibration("A", RampDirection.Up, "cal.csv", "calibration sweep", new AxisPolynomial([1e9, 2e7], 0.5, 0.5, 0, 1),
            [], [], [], 1e4, 100, 2, []);
        var text = CalibrationFile.ToJson(new CalibrationSet([inst], [axis], "setup.toml"));
        Assert.Contains("\"schema_version\": 2", text);

        var v1 = Path.Combine(_dir, "v1.json");
        File.WriteAllText(v1, text.Replace("\"schema_version\": 2", "\"version\": 1"));
        var set = CalibrationFile.Read(v1);
        Assert.Equal(1.5e9, set.Instruments.Single().FsrHz);
        Assert.Equal([1e9, 2e7], set.Axes.Single().Axis.Coefficients);

        var v3 = Path.Combine(_dir, "v3.json");
        File.WriteAllText(v3, text.Replace("\"schema_version\": 2", "\"schema_version\": 3"));
        Assert.Contains("not supported", Assert.Throws<InputException>(() => CalibrationFile.Read(v3)).Message);

        var report = Path.Combine(_dir, "report.json");
        File.WriteAllText(report, "{\"schema_version\": 2, \"tool\": \"orderunfold\", \"lines\": []}");
        Assert.StartsWith("not an OrderUnfold calibration file", Assert.Throws<InputException>(() => CalibrationFile.Read(report)).Message);

        var noFsr = Path.Combine(_dir, "nofsr.json");
        File.WriteAllText(noFsr, text.Replace("\"fsr_hz\": 1500000000,", ""));
        Assert.Contains("lacks a required field", Assert.Throws<InputException>(() => CalibrationFile.Read(noFsr)).Message);

        var bad = Path.Combine(_dir, "bad.json");
        File.WriteAllText(bad, text.Replace("\"fsr_hz\": 1500000000", "\"fsr_hz\": \"1.5 GHz\""));
        var e = Assert.Throws<InputException>(() => CalibrationFile.Read(bad));
        Assert.Equal("expected a number for \"instruments[0].fsr_hz\"", e.Message);
        Assert.Equal(bad, e.File);
        Assert.NotNull(e.Line);
    }
}
