using System.Text;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>
/// One line of comma-separated text (RFC 4180 quoting, one record per line): the manifest and the summary
/// tables are read and written with it, line by line, so that a table of any length is streamed.
/// </summary>
public static class CsvLine
{
    /// <summary>
    /// Splits one line into fields. Quoted fields may hold commas and doubled quotes; whitespace around
    /// unquoted fields is trimmed. Returns false with a message when a quote is not closed or text follows
    /// a closing quote.
    /// </summary>
    public static bool TrySplit(string line, out List<string> fields, out string? error)
    {
        fields = [];
        error = null;
        var sb = new StringBuilder();
        var i = 0;
        while (true)
        {
            // one field
            while (i < line.Length && line[i] is ' ' or '\t') i++;
            if (i < line.Length && line[i] == '"')
            {
                var start = i + 1;
                i++;
                sb.Clear();
                var closed = false;
                while (i < line.Length)
                {
                    if (line[i] == '"')
                    {
                        if (i + 1 < line.Length && line[i + 1] == '"')
                        {
                            sb.Append('"');
                            i += 2;
                            continue;
                        }

                        closed = true;
                        i++;
                        break;
                    }

                    sb.Append(line[i++]);
                }

                if (!closed)
                {
                    error = $"the quote opened at column {start} is not closed on this line (fields may not span lines)";
                    return false;
                }

                while (i < line.Length && line[i] is ' ' or '\t') i++;
                if (i < line.Length && line[i] != ',')
                {
                    error = $"unexpected text after the closing quote at column {i + 1}; expected a comma";
                    return false;
                }

                fields.Add(sb.ToString());
            }
            else
            {
                var comma = line.IndexOf(',', i);
                var end = comma < 0 ? line.Length : comma;
                fields.Add(line[i..end].Trim());
                i = end;
            }

            if (i >= line.Length) return true;
            i++; // the comma
            if (i == line.Length)
            {
                fields.Add("");
                return true;
            }
        }
    }

    /// <summary>A field as CSV text: quoted when it holds a comma, a quote or leading/trailing space; line breaks become spaces.</summary>
    public static string Quote(string? value)
    {
        if (string.IsNullOrEmpty(value)) return "";
        var v = Io.CsvCell.Guard(value.Replace("\r\n", " ").Replace('\n', ' ').Replace('\r', ' ')); // formula guard (CSV injection)
        var needs = v.Contains(',') || v.Contains('"') || v[0] == ' ' || v[^1] == ' ';
        return needs ? "\"" + v.Replace("\"", "\"\"") + "\"" : v;
    }

    /// <summary>Joins fields into one CSV line (no line break).</summary>
    public static string Join(IEnumerable<string?> fields) => string.Join(",", fields.Select(Quote));
}
