using OrderUnfold.Units;

namespace OrderUnfold.Planning;

/// <summary>The candidate-length catalogue file: one length per line with an optional label.</summary>
public static class CandidateCatalogue
{
    /// <summary>
    /// Reads a catalogue: one candidate per line, a length with its unit, optionally followed by a comma and a
    /// label (<c>93.7 mm, spacer B-12</c>). Blank lines and text after <c>#</c> are ignored. Bad lines throw
    /// <see cref="InputException"/> with the file, line and column.
    /// </summary>
    public static IReadOnlyList<CandidateLength> ReadCatalogue(string path)
    {
        string text;
        try
        {
            text = File.ReadAllText(path);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new InputException($"cannot read the catalogue: {e.Message}", path);
        }

        return ParseCatalogue(text, path);
    }

    /// <summary>Parses catalogue text (see <see cref="ReadCatalogue"/>); <paramref name="path"/> is used in messages.</summary>
    public static IReadOnlyList<CandidateLength> ParseCatalogue(string text, string path)
    {
        var list = new List<CandidateLength>();
        var lines = text.Replace("\r\n", "\n").Split('\n');
        for (var i = 0; i < lines.Length; i++)
        {
            var raw = lines[i];
            var hash = raw.IndexOf('#');
            var content = hash >= 0 ? raw[..hash] : raw;
            if (string.IsNullOrWhiteSpace(content)) continue;
            var comma = content.IndexOf(',');
            var lengthText = comma >= 0 ? content[..comma] : content;
            var label = comma >= 0 ? content[(comma + 1)..].Trim() : null;
            var column = raw.Length - raw.TrimStart().Length + 1;
            if (!Quantity.TryParse(lengthText.Trim(), Dimension.Length, out var value, out var error))
                throw new InputException($"expected a cavity length such as \"93.7 mm\" at the start of the line: {error}", path, i + 1, column);
            if (!(value > 0)) throw new InputException($"a cavity length must be positive but got \"{lengthText.Trim()}\"", path, i + 1, column);
            list.Add(new CandidateLength(value, string.IsNullOrEmpty(label) ? null : label));
        }

        if (list.Count == 0) throw new InputException("the catalogue lists no lengths (one length with its unit per line, e.g. \"93.7 mm\")", path);
        return list;
    }
}
