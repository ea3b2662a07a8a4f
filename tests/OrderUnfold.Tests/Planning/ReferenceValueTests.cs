using System.Globalization;
using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using Xunit;

namespace OrderUnfold.Tests.Planning;

/// <summary>
/// Compares the exact margin routines with values computed independently by tests/reference/plan_margin_reference.py
/// (numpy dense grid refined with scipy's bounded minimiser and bracketing root finder; common periods from Python's
/// exact fractions). The script's output, tests/reference/plan_margin_reference.csv, is read here. The designs are
/// invented (simulated) cavities.
/// </summary>
public class ReferenceValueTests
{
    public static IEnumerable<object[]> Rows() => ReadRows().Select(r => new object[] { r["design"] });

    [Theory]
    [MemberData(nameof(Rows))]
    public void MarginMinimaCrossingsAndRepeatsMatchTheReferenceScript(string design)
    {
        var row = ReadRows().Single(r => r["design"] == design);
        var fsr = row["fsr_hz"].Split(';').Select(Num).ToArray();
        var finesse = row["finesse"].Split(';').Select(Num).ToArray();
        var insts = fsr.Select((f, i) => new Instrument($"c{i + 1}", f, finesse[i])).ToList();
        var from = Num(row["from_hz"]);
        var to = Num(row["to_hz"]);
        var threshold = Num(row["threshold"]);

        // reference precision: the minimiser stops within ~1e-5 Hz in Δ; agreement asked: 1e-6 linewidths, 1 kHz in Δ
        var min = AliasMargin.Minimum(insts, from, to);
        Assert.Equal(Num(row["minimum_linewidths"]), min.MarginLinewidths, 1e-6);
        Assert.Equal(Num(row["minimum_delta_hz"]), min.DeltaHz, 1e3);
        var lowest = AliasMargin.LowestAlias(insts, from, to);
        Assert.Equal(Num(row["lowest_alias_linewidths"]), lowest.MarginLinewidths, 1e-6);
        Assert.Equal(Num(row["lowest_alias_delta_hz"]), lowest.DeltaHz, 1e3);

        var first = AliasMargin.FirstBelow(insts, threshold, from, to);
        if (row["first_below_hz"].Length == 0) Assert.Null(first);
        else Assert.Equal(Num(row["first_below_hz"]), first!.Value, 1e3);

        var repeat = AliasMargin.FindRepeat(insts, insts.Select(_ => 1e-9).ToList(), 100_000);
        Assert.Equal(long.Parse(row["repeat_multiple"], CultureInfo.InvariantCulture), repeat!.Multiple);
    }

    private static double Num(string s) => double.Parse(s, NumberStyles.Float, CultureInfo.InvariantCulture);

    private static List<Dictionary<string, string>> ReadRows()
    {
        var dir = new DirectoryInfo(AppContext.BaseDirectory);
        string? path = null;
        while (dir is not null)
        {
            var candidate = Path.Combine(dir.FullName, "tests", "reference", "plan_margin_reference.csv");
            if (File.Exists(candidate))
            {
                path = candidate;
                break;
            }

            dir = dir.Parent;
        }

        Assert.True(path is not null, "tests/reference/plan_margin_reference.csv not found above " + AppContext.BaseDirectory);
        var lines = File.ReadAllLines(path!).Where(l => l.Length > 0).ToArray();
        var header = lines[0].Split(',');
        return lines.Skip(1).Select(l => header.Zip(l.Split(',')).ToDictionary(p => p.First, p => p.Second)).ToList();
    }
}
