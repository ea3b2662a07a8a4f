using CsCheck;
using OrderUnfold.Io;
using Xunit;

namespace OrderUnfold.Tests.Io;

/// <summary>Row splitting: the direct splitter for quote-free text must give exactly the rows CsvHelper gives.</summary>
public class DelimitedTextTests
{
    [Fact]
    public void PlainSplitterAgreesWithCsvHelperOnQuoteFreeText()
    {
        // random quote-free texts built from the characters that matter: delimiters, spaces, tabs, line ends, digits, signs,
        // decimal marks and letters; CsCheck draws the cases (reproducible from its seed)
        var chars = Gen.Char[",;\t \r\n0123456789.-+eEaNn#x"];
        var gen = Gen.Select(Gen.String[chars, 0, 200], Gen.Int[0, 2]);
        gen.Sample((raw, d) =>
        {
            var text = raw.Replace("\r", "\r\n"); // no lone carriage returns: those go to CsvHelper
            var delimiter = DelimitedText.Delimiters[d];
            var plain = DelimitedText.PlainRows(text, delimiter).ToList();
            var csv = DelimitedText.CsvRows(text, delimiter).ToList();
            // CsvHelper may or may not report a final empty line; blank rows carry no data either way
            while (csv.Count > plain.Count && csv[^1].IsBlank) csv.RemoveAt(csv.Count - 1);
            while (plain.Count > csv.Count && plain[^1].IsBlank) plain.RemoveAt(plain.Count - 1);
            Assert.Equal(csv.Count, plain.Count);
            for (var i = 0; i < csv.Count; i++)
            {
                Assert.Equal(csv[i].Line, plain[i].Line);
                Assert.Equal(csv[i].Fields, plain[i].Fields);
            }
        }, iter: 2000, threads: 1);
    }

    [Fact]
    public void NumberTestWithoutParsingAgreesWithClassify()
    {
        // IsNumberCell decides "number or non-finite word" by grammar; Classify parses with double.TryParse (the reference
        // here is .NET's own parser). Random short strings over the characters that matter, both decimal marks.
        var chars = Gen.Char["0123456789.,eE+- \t\0naNIifty∞#x"];
        Gen.Select(Gen.String[chars, 0, 9], Gen.Bool).Sample((cell, comma) =>
        {
            var kind = DelimitedText.Classify(cell, comma, out _);
            var expected = kind is CellKind.Finite or CellKind.NonFinite;
            Assert.True(expected == DelimitedText.IsNumberCell(cell, comma), $"\"{cell}\" (decimal comma {comma}): Classify says {kind}");
        }, iter: 100000, threads: 1);
        foreach (var cell in new[] { "1", "-1.5", "+.5", "5.", "1e5", "1E-05", "-1.#IND", "nan", "-Infinity", "∞", "1,5" })
            Assert.Equal(DelimitedText.Classify(cell, false, out _) is CellKind.Finite or CellKind.NonFinite, DelimitedText.IsNumberCell(cell, false));
    }

    [Theory]
    [InlineData("a,\"b,c\"\n1,2\n", "a|b,c/1|2")]
    [InlineData("1,2\r3,4\r", "1|2/3|4")]
    public void QuotesAndLoneCarriageReturnsGoThroughCsvHelper(string text, string expected)
    {
        // a quoted delimiter stays inside its field, and a lone carriage return ends a line (RFC 4180 reading)
        Assert.Equal(expected, string.Join("/", DelimitedText.Rows(text, ',').Where(r => !r.IsBlank).Select(r => string.Join("|", r.Fields))));
    }
}

/// <summary>Layout detection on quote-free text (split line by line without strings) must find what it finds when
/// every row is split by CsvHelper. The exports are random, simulated oscilloscope-like files.</summary>
public class LayoutDetectionAgreementTests
{
    private static string RandomExport(Random rng)
    {
        var delimiter = DelimitedText.Delimiters[rng.Next(3)];
        var comma = delimiter != ',' && rng.Next(2) == 0;
        var lineEnd = rng.Next(2) == 0 ? "\n" : "\r\n";
        var sb = new System.Text.StringBuilder();
        string Num(double v) => comma ? v.ToString("G6", System.Globalization.CultureInfo.InvariantCulture).Replace('.', ',') : v.ToString("G6", System.Globalization.CultureInfo.InvariantCulture);
        var fields = 1 + rng.Next(4);
        for (var i = rng.Next(6); i > 0; i--)
        {
            // settings lines: a name and a value, sometimes a number-only line or a blank line
            var kind = rng.Next(4);
            sb.Append(kind switch
            {
                0 => $"Setting {i}{delimiter}{Num(rng.NextDouble())}",
                1 => Num(rng.NextDouble() * 100),
                2 => "",
                _ => $"Model{delimiter}XZ-{rng.Next(100)}{delimiter}{delimiter}",
            }).Append(lineEnd);
        }

        if (rng.Next(3) > 0) sb.Append(string.Join(delimiter, Enumerable.Range(0, fields).Select(f => $"col{f} (V)"))).Append(lineEnd);
        var rows = 3 + rng.Next(60);
        for (var r = 0; r < rows; r++)
        {
            var cells = Enumerable.Range(0, fields).Select(_ => rng.Next(40) == 0 ? "NaN" : rng.Next(60) == 0 ? "" : Num((rng.NextDouble() - 0.5) * Math.Pow(10, rng.Next(-6, 4))));
            sb.Append(string.Join(delimiter, cells));
            if (rng.Next(30) == 0) sb.Append(delimiter);
            sb.Append(rng.Next(50) == 0 ? lineEnd + lineEnd : lineEnd);
        }

        return sb.ToString();
    }

    [Fact]
    public void QuoteFreeDetectionMatchesCsvHelperSplitting()
    {
        for (var seed = 0; seed < 400; seed++)
        {
            var text = RandomExport(new Random(seed));
            string Describe(bool csv)
            {
                try
                {
                    var l = DelimitedText.Detect(text, null, null, null, "f.csv", alwaysCsvHelper: csv);
                    return $"{l.Delimiter}|{l.DecimalComma}|{l.FieldCount}|{l.FirstDataLine}|{l.HeaderLine}|{(l.Header is null ? "-" : string.Join("/", l.Header))}";
                }
                catch (InputException e)
                {
                    return "error: " + e.Message;
                }
            }

            Assert.True(Describe(false) == Describe(true), $"seed {seed}: {Describe(false)} vs {Describe(true)}\n{text}");
        }
    }
}
