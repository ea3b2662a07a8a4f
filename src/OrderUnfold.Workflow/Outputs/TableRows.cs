using System.Globalization;
using CsvHelper;
using OrderUnfold.Io;

namespace OrderUnfold.Outputs;

/// <summary>Columns of lines.csv, one row per <see cref="ReportLine"/> (the values of report.json's lines): the fwhm columns
/// only when widths were fitted, absolute_frequency_hz only with an anchor; frequency_bootstrap_sigma_hz and note are in
/// report.json only.</summary>
public sealed class LineColumns : TableColumns<ReportLine>
{
    /// <summary>The columns of a table with or without the optional ones.</summary>
    public LineColumns(bool widths, bool absolute)
    {
        Number("frequency_hz", m => m.FrequencyHz);
        Number("frequency_sigma_hz", m => m.FrequencySigmaHz);
        Number("frequency_crb_hz", m => m.FrequencyCrbHz);
        Number("frequency_axis_sigma_hz", m => m.FrequencyAxisSigmaHz);
        Number("intensity", m => m.Intensity);
        Number("intensity_sigma", m => m.IntensitySigma);
        Number("snr", m => m.Snr);
        if (widths)
        {
            Number("fwhm_hz", m => m.FwhmHz);
            Number("fwhm_sigma_hz", m => m.FwhmSigmaHz);
        }

        Text("order_verdict", m => OutputJson.Name(m.OrderVerdict));
        Number("alias_shift_hz", m => m.AliasShiftHz);
        Number("alias_delta_chi2", m => m.AliasDeltaChi2);
        if (absolute) Number("absolute_frequency_hz", m => m.AbsoluteFrequencyHz);
    }
}

/// <summary>One row of spectrum.csv: a grid bin, its recovered intensity and (when computed) the detection limit there.</summary>
public sealed record SpectrumRow(double FrequencyHz, double Intensity, double? DetectionLimit);

/// <summary>Columns of spectrum.csv: detection_limit only when it was computed.</summary>
public sealed class SpectrumRowColumns : TableColumns<SpectrumRow>
{
    /// <summary>The columns with or without the detection limit.</summary>
    public SpectrumRowColumns(bool detectionLimit)
    {
        Number("frequency_hz", m => m.FrequencyHz);
        Number("intensity", m => m.Intensity);
        if (detectionLimit) Number("detection_limit", m => m.DetectionLimit);
    }
}

/// <summary>
/// The columns of a table of records of <typeparamref name="T"/>, each declared once with its header name and value: a
/// CsvHelper record writer whose columns may depend on the run (optional columns). Numbers are written as round-trip text
/// (invariant culture) and empty when missing or not finite; text cells are guarded against formula injection
/// (<see cref="CsvCell.Guard"/>) and quoted by CsvHelper when needed.
/// </summary>
public abstract class TableColumns<T> : CsvRecordWriter<T>
{
    private readonly List<(string Name, Action<CsvWriter, T> Write)> _columns = [];

    /// <inheritdoc />
    public override int FieldCount => _columns.Count;

    /// <summary>The header names, in order.</summary>
    public IReadOnlyList<string> Names => _columns.Select(c => c.Name).ToList();

    /// <summary>Adds a number column.</summary>
    protected void Number(string name, Func<T, double?> value) =>
        _columns.Add((name, (w, r) => w.WriteField(OutputJson.Finite(value(r)), "R")));

    /// <summary>Adds an integer column (empty when missing).</summary>
    protected void Integer(string name, Func<T, int?> value) => _columns.Add((name, (w, r) => w.WriteField(value(r), "")));

    /// <summary>Adds a text column (formula-guarded).</summary>
    protected void Text(string name, Func<T, string?> value) => _columns.Add((name, (w, r) => w.WriteField(CsvCell.Guard(value(r)))));

    /// <inheritdoc />
    public override void WriteHeader(CsvWriter writer)
    {
        foreach (var c in _columns) WriteColumnName(writer, c.Name);
    }

    /// <inheritdoc />
    public override void Write(CsvWriter writer, T record)
    {
        foreach (var c in _columns) c.Write(writer, record);
    }
}

/// <summary>Writes the CSV tables: comma separated, a header row, "\n" line ends, invariant culture.</summary>
public static class OutputCsv
{
    /// <summary>The table text of <paramref name="rows"/> in <paramref name="columns"/>.</summary>
    public static string Write<T>(IEnumerable<T> rows, TableColumns<T> columns)
    {
        using var text = new StringWriter(CultureInfo.InvariantCulture);
        var options = CsvWriterOptions.Default with { NewLine = "\n", FormatProvider = CultureInfo.InvariantCulture, HasHeader = true };
        using (var csv = CsvWriter.Create(text, options, leaveOpen: true))
            csv.WriteRecords(rows, columns);
        return text.ToString();
    }
}
