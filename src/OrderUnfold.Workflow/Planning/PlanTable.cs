using System.Globalization;
using CsvHelper;
using OrderUnfold.Io;

namespace OrderUnfold.Planning;

/// <summary>A number cell written as the shortest round-trip text, non-finite values included (NaN, Infinity).</summary>
public sealed class RoundTripNumberCell : ICsvConverter<double>
{
    /// <inheritdoc />
    public double Read(CsvReader reader, int index) => NumberCell.ParseNumber(reader[index].ToString());

    /// <inheritdoc />
    public void Write(CsvWriter writer, double value) => writer.WriteField(value.ToString("R", CultureInfo.InvariantCulture));
}

/// <summary>The first columns of a plan.csv row: its rank and how many cavities the design has.</summary>
[CsvRecord]
public sealed partial record PlanRank
{
    /// <summary>1-based position in the file.</summary>
    [CsvColumn("rank"), CsvConverter(typeof(WholeNumberCell<int>))]
    public int Rank { get; init; }

    /// <summary>Cavities of the design, the reference included.</summary>
    [CsvColumn("cavities"), CsvConverter(typeof(WholeNumberCell<int>))]
    public int Cavities { get; init; }
}

/// <summary>One planned cavity's columns in plan.csv (prefixed cavity2_, cavity3_, …).</summary>
[CsvRecord]
public sealed partial record PlannedCavityColumns
{
    /// <summary>Length, m (empty when the cavity is given by its FSR).</summary>
    [CsvColumn("length_m"), CsvConverter(typeof(RoundTripNumberCell))]
    public double? LengthM { get; init; }

    /// <summary>Free spectral range, Hz.</summary>
    [CsvColumn("fsr_hz"), CsvConverter(typeof(RoundTripNumberCell))]
    public double FsrHz { get; init; }

    /// <summary>Finesse.</summary>
    [CsvColumn("finesse"), CsvConverter(typeof(RoundTripNumberCell))]
    public double Finesse { get; init; }

    /// <summary>Cavity geometry.</summary>
    [CsvColumn("geometry"), CsvConverter(typeof(LowerCaseCell<CavityGeometry>))]
    public CavityGeometry Geometry { get; init; }

    /// <summary>Length tolerance, m.</summary>
    [CsvColumn("tolerance_m"), CsvConverter(typeof(RoundTripNumberCell))]
    public double? ToleranceM { get; init; }

    /// <summary>Catalogue label of the part, if any.</summary>
    [CsvColumn("label"), CsvConverter(typeof(OptionalTextCell))]
    public string? Label { get; init; }

    /// <summary>The columns of one planned cavity.</summary>
    public static PlannedCavityColumns Of(DesignCavity a) => new()
    {
        LengthM = a.Instrument.LengthM, FsrHz = a.Instrument.FsrHz, Finesse = a.Instrument.Finesse, Geometry = a.Instrument.Geometry,
        ToleranceM = a.LengthToleranceM, Label = a.Label,
    };
}

/// <summary>The last columns of a plan.csv row: the design's alias margins, common period, SNR needed and verdict.</summary>
[CsvRecord]
public sealed partial record PlanMargins
{
    /// <summary>Worst alias margin within the length tolerance, linewidths.</summary>
    [CsvColumn("worst_margin_linewidths"), CsvConverter(typeof(RoundTripNumberCell))]
    public double WorstMarginLinewidths { get; init; }

    /// <summary>Where it occurs, Hz.</summary>
    [CsvColumn("worst_delta_hz"), CsvConverter(typeof(RoundTripNumberCell))]
    public double WorstDeltaHz { get; init; }

    /// <summary>Worst alias margin at the nominal lengths, linewidths.</summary>
    [CsvColumn("nominal_margin_linewidths"), CsvConverter(typeof(RoundTripNumberCell))]
    public double NominalMarginLinewidths { get; init; }

    /// <summary>Where it occurs, Hz.</summary>
    [CsvColumn("nominal_delta_hz"), CsvConverter(typeof(RoundTripNumberCell))]
    public double NominalDeltaHz { get; init; }

    /// <summary>Bound on the error of sampling the tolerance box, linewidths.</summary>
    [CsvColumn("sampling_error_bound_linewidths"), CsvConverter(typeof(RoundTripNumberCell))]
    public double SamplingErrorBoundLinewidths { get; init; }

    /// <summary>First shift where the margin falls below the threshold, Hz (empty: none within the span).</summary>
    [CsvColumn("first_alias_hz"), CsvConverter(typeof(RoundTripNumberCell))]
    public double? FirstAliasHz { get; init; }

    /// <summary>The common period as a multiple of the reference FSR.</summary>
    [CsvColumn("repeat_fsr1_multiple"), CsvConverter(typeof(WholeNumberCell<long>))]
    public long? RepeatFsr1Multiple { get; init; }

    /// <summary>The common period, Hz.</summary>
    [CsvColumn("repeat_hz"), CsvConverter(typeof(RoundTripNumberCell))]
    public double? RepeatHz { get; init; }

    /// <summary>Peak SNR needed to reject the worst alias (<c>inf</c> for an exact alias).</summary>
    [CsvColumn("required_peak_snr"), CsvConverter(typeof(NumberOrInfinityCell))]
    public double RequiredPeakSnr { get; init; }

    /// <summary>The design verdict in words (ok, fails within tolerance, alias in span, repeats in span).</summary>
    [CsvColumn("verdict"), CsvConverter(typeof(TextCell))]
    public string Verdict { get; init; } = "";

    /// <summary>The margins of a design.</summary>
    public static PlanMargins Of(DesignEvaluation d) => new()
    {
        WorstMarginLinewidths = d.Robust.MarginLinewidths, WorstDeltaHz = d.Robust.DeltaHz, NominalMarginLinewidths = d.Nominal.MarginLinewidths,
        NominalDeltaHz = d.Nominal.DeltaHz, SamplingErrorBoundLinewidths = d.SamplingErrorBoundLinewidths, FirstAliasHz = d.FirstAliasHz,
        RepeatFsr1Multiple = d.Repeat?.Multiple, RepeatHz = d.Repeat?.RepeatHz, RequiredPeakSnr = d.RequiredPeakSnr, Verdict = d.VerdictText,
    };
}

/// <summary>One row of plan.csv: rank, the planned cavities (null for a group the design does not fill), margins.</summary>
public sealed record PlanRow(PlanRank Rank, IReadOnlyList<PlannedCavityColumns?> Cavities, PlanMargins Margins);

/// <summary>
/// plan.csv: one <see cref="PlanRow"/> per design, SI units named in the headers, the planned cavities in numbered
/// column groups (cavity2_…, cavity3_…), as many groups as the design with most cavities needs. Written and read
/// with the generated mappers of the three column groups.
/// </summary>
public static class PlanTable
{
    /// <summary>The rows of <paramref name="designs"/> in the order given.</summary>
    public static List<PlanRow> Rows(IReadOnlyList<DesignEvaluation> designs)
    {
        var groups = designs.Count == 0 ? 1 : designs.Max(d => d.Added.Count);
        return designs.Select((d, i) => new PlanRow(new PlanRank { Rank = i + 1, Cavities = d.Cavities.Count },
            Enumerable.Range(0, groups).Select(k => k < d.Added.Count ? PlannedCavityColumns.Of(d.Added[k]) : null).ToList(),
            PlanMargins.Of(d))).ToList();
    }

    /// <summary>The table as text (header and rows).</summary>
    public static string Text(IReadOnlyList<PlanRow> rows)
    {
        var groups = rows.Count == 0 ? 1 : rows.Max(r => r.Cavities.Count);
        return CsvTable.ToText(csv => csv.WriteRecords(rows, new RowWriter(groups)));
    }

    /// <summary>Reads a plan.csv (InputException naming file, line and column when it is not one).</summary>
    public static List<PlanRow> Read(string path)
    {
        using var csv = CsvTable.OpenReader(path, "plan table");
        var groups = CsvTable.Located(path, () => csv.Headers.Count(h => h.StartsWith("cavity", StringComparison.Ordinal) && h.EndsWith("_fsr_hz", StringComparison.Ordinal)));
        try
        {
            var rank = CsvRecordMapper.Create<PlanRank>(csv);
            var cavities = Enumerable.Range(0, groups).Select(k => (Prefix: Prefix(k), Mapper: CsvRecordMapper.Create<PlannedCavityColumns>(csv, Prefix(k)))).ToList();
            var margins = CsvRecordMapper.Create<PlanMargins>(csv);
            var rows = new List<PlanRow>();
            while (CsvTable.Located(path, csv.Read))
                rows.Add(CsvTable.Located(path, () => new PlanRow(csv.GetRecord(rank),
                    cavities.Select(c => csv[c.Prefix + "fsr_hz"].IsEmpty ? null : csv.GetRecord(c.Mapper)).ToList(), csv.GetRecord(margins)), csv.Headers));
            return rows;
        }
        catch (KeyNotFoundException e)
        {
            throw new InputException($"not a plan table: {e.Message}", path, 1);
        }
    }

    private static string Prefix(int k) => $"cavity{k + 2}_";

    /// <summary>Writes a row as its three column groups, the cavity groups with their prefixes (empty cells for a group the design does not fill).</summary>
    private sealed class RowWriter(int groups) : CsvRecordWriter<PlanRow>
    {
        private readonly CsvRecordWriter<PlanRank> _rank = CsvRecordWriter.Create<PlanRank>();
        private readonly List<CsvRecordWriter<PlannedCavityColumns>> _cavities =
            Enumerable.Range(0, groups).Select(k => CsvRecordWriter.Create<PlannedCavityColumns>(Prefix(k))).ToList();
        private readonly CsvRecordWriter<PlanMargins> _margins = CsvRecordWriter.Create<PlanMargins>();

        public override int FieldCount => _rank.FieldCount + _cavities.Sum(c => c.FieldCount) + _margins.FieldCount;

        public override void WriteHeader(CsvWriter writer)
        {
            _rank.WriteHeader(writer);
            foreach (var c in _cavities) c.WriteHeader(writer);
            _margins.WriteHeader(writer);
        }

        public override void Write(CsvWriter writer, PlanRow row)
        {
            _rank.Write(writer, row.Rank);
            for (var k = 0; k < _cavities.Count; k++)
                if (k < row.Cavities.Count && row.Cavities[k] is { } c) _cavities[k].Write(writer, c);
                else _cavities[k].WriteEmpty(writer);
            _margins.Write(writer, row.Margins);
        }
    }
}
