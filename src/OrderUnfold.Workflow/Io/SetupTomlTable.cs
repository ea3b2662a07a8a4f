using System.Globalization;
using OrderUnfold.Units;
using Tomlyn.Syntax;

namespace OrderUnfold.Io;

/// <summary>
/// One table of a setup file as written in the syntax tree, with typed accessors that point every
/// complaint at the line and column of the key or value concerned.
/// </summary>
internal sealed class SetupTomlTable
{
    private readonly Dictionary<string, KeyValueSyntax> _entries;

    private SetupTomlTable(string file, string name, bool isArray, int index, SyntaxNodeBase header, Dictionary<string, KeyValueSyntax> entries)
    {
        File = file;
        Name = name;
        IsArray = isArray;
        Index = index;
        Header = header;
        _entries = entries;
    }

    /// <summary>Path of the setup file (for messages).</summary>
    public string File { get; }

    public string Name { get; }

    public bool IsArray { get; }

    /// <summary>1-based position among the tables of the same name.</summary>
    public int Index { get; }

    /// <summary>The table header node (<c>[[sweep]]</c>).</summary>
    public SyntaxNodeBase Header { get; }

    /// <summary>1-based line of the table header.</summary>
    public int Line => Header.Span.Start.Line + 1;

    /// <summary>The table as written, e.g. <c>[[sweep]]</c>.</summary>
    public string Title => SetupSchema.Bracketed(Name, IsArray);

    /// <summary>Builds the view and rejects dotted or unknown keys, suggesting the nearest accepted one.</summary>
    public static SetupTomlTable Create(string file, string name, bool isArray, int index, SyntaxNodeBase header,
        IEnumerable<KeyValueSyntax> items, IReadOnlyList<string> accepted)
    {
        var entries = new Dictionary<string, KeyValueSyntax>(StringComparer.Ordinal);
        var title = SetupSchema.Bracketed(name, isArray);
        foreach (var kv in items)
        {
            var key = KeyText(kv.Key);
            if (kv.Key is { DotKeys.ChildrenCount: > 0 })
                throw At(file, kv.Key, $"dotted key '{key}' is not accepted in {title}; accepted keys: {string.Join(", ", accepted)}");
            if (!accepted.Contains(key, StringComparer.Ordinal))
            {
                var near = SetupSchema.Closest(key, accepted);
                var hint = near is null ? $"accepted keys: {string.Join(", ", accepted)}" : $"did you mean '{near}'? (accepted keys: {string.Join(", ", accepted)})";
                throw At(file, (SyntaxNodeBase?)kv.Key ?? kv, $"unknown key '{key}' in {title}; {hint}");
            }

            entries[key] = kv;
        }

        return new SetupTomlTable(file, name, isArray, index, header, entries);
    }

    /// <summary>The text of a key (bare or quoted; dotted parts joined by '.').</summary>
    public static string KeyText(KeySyntax? key)
    {
        if (key is null) return "";
        var parts = new List<string> { Part(key.Key) };
        foreach (var dotted in key.DotKeys) parts.Add(Part(dotted.Key));
        return string.Join('.', parts);

        static string Part(BareKeyOrStringValueSyntax? p) => p switch
        {
            BareKeySyntax b => b.Key?.Text ?? "",
            StringValueSyntax s => s.Value ?? "",
            _ => "",
        };
    }

    /// <summary>An <see cref="InputException"/> at the start of a node.</summary>
    public static InputException At(string file, SyntaxNodeBase? node, string message) =>
        node is null
            ? new InputException(message, file)
            : new InputException(message, file, node.Span.Start.Line + 1, node.Span.Start.Column + 1);

    /// <summary>An <see cref="InputException"/> at the table header.</summary>
    public InputException AtHeader(string message) => At(File, Header, message);

    /// <summary>An <see cref="InputException"/> at the value of a key present in this table.</summary>
    public InputException AtValue(string key, string message) => At(File, ValueNode(key), message);

    /// <summary>An <see cref="InputException"/> at a key present in this table.</summary>
    public InputException AtKey(string key, string message) =>
        At(File, _entries.TryGetValue(key, out var kv) ? kv.Key : Header, message);

    public bool Has(string key) => _entries.ContainsKey(key);

    /// <summary>The value node of a key (or the key/value node when the value is missing after a syntax error).</summary>
    public SyntaxNodeBase? ValueNode(string key) =>
        _entries.TryGetValue(key, out var kv) ? (SyntaxNodeBase?)kv.Value ?? kv : Header;

    /// <summary>Throws unless the key is present.</summary>
    public void Require(string key, string meaning)
    {
        if (!Has(key)) throw AtHeader($"{Title} needs the key '{key}' ({meaning}) but it is missing");
    }

    public string? OptionalString(string key)
    {
        if (!_entries.TryGetValue(key, out var kv)) return null;
        if (kv.Value is StringValueSyntax s) return s.Value ?? "";
        throw AtValue(key, $"{key} must be a string in quotes but got {Describe(kv.Value)}");
    }

    /// <summary>A required string that is not blank.</summary>
    public string RequiredString(string key, string meaning)
    {
        Require(key, meaning);
        var s = OptionalString(key)!;
        if (string.IsNullOrWhiteSpace(s)) throw AtValue(key, $"{key} must not be empty ({meaning})");
        return s;
    }

    /// <summary>A TOML integer or float; NaN and infinities are refused.</summary>
    public double? OptionalNumber(string key)
    {
        if (!_entries.TryGetValue(key, out var kv)) return null;
        double v = kv.Value switch
        {
            IntegerValueSyntax i => i.Value,
            FloatValueSyntax f => f.Value,
            _ => throw AtValue(key, $"{key} must be a number but got {Describe(kv.Value)}"),
        };
        if (!double.IsFinite(v)) throw AtValue(key, $"{key} must be a finite number but got {Describe(kv.Value)}");
        return v;
    }

    public bool? OptionalBool(string key)
    {
        if (!_entries.TryGetValue(key, out var kv)) return null;
        if (kv.Value is BooleanValueSyntax b) return b.Value;
        throw AtValue(key, $"{key} must be true or false but got {Describe(kv.Value)}");
    }

    /// <summary>A string with a unit, such as "50 mm"; a bare number gets the message that lists the units.</summary>
    public double? OptionalQuantity(string key, Dimension dimension)
    {
        if (!_entries.TryGetValue(key, out var kv)) return null;
        return Quantity(key, kv.Value, dimension);
    }

    /// <summary>Parses one value node as a quantity with a unit.</summary>
    public double Quantity(string what, ValueSyntax? value, Dimension dimension)
    {
        string text;
        switch (value)
        {
            case StringValueSyntax s:
                text = s.Value ?? "";
                break;
            case IntegerValueSyntax or FloatValueSyntax:
                // A bare TOML number: let the unit parser explain which units are needed.
                text = RawText(value);
                break;
            default:
                throw At(File, (SyntaxNodeBase?)value ?? Header, $"{what} must be a string with a unit, such as \"{Units.Quantity.Example(dimension)}\", but got {Describe(value)}");
        }

        if (!Units.Quantity.TryParse(text, dimension, out var v, out var error))
            throw At(File, (SyntaxNodeBase?)value ?? Header, $"{what}: {error}");
        return v;
    }

    /// <summary>A string chosen from a fixed list (compared without regard to case).</summary>
    public T Choice<T>(string key, IReadOnlyDictionary<string, T> choices, T fallback)
    {
        if (!_entries.TryGetValue(key, out var kv)) return fallback;
        var list = string.Join(" | ", choices.Keys.Select(k => $"\"{k}\""));
        if (kv.Value is not StringValueSyntax s)
            throw AtValue(key, $"{key} must be one of {list} but got {Describe(kv.Value)}");
        var text = (s.Value ?? "").Trim();
        foreach (var (name, result) in choices)
            if (string.Equals(name, text, StringComparison.OrdinalIgnoreCase)) return result;
        throw AtValue(key, $"{key} must be one of {list} but got \"{s.Value}\"");
    }

    /// <summary>The value of a present key as the user wrote it: a string's content, or a number's digits.</summary>
    public string ValueText(string key) =>
        _entries.TryGetValue(key, out var kv) ? kv.Value is StringValueSyntax s ? s.Value ?? "" : RawText(kv.Value) : "";

    /// <summary>Source text of a scalar value for messages.</summary>
    public static string RawText(ValueSyntax? value) => value switch
    {
        null => "nothing",
        StringValueSyntax s => s.Token?.Text ?? $"\"{s.Value}\"",
        IntegerValueSyntax i => i.Token?.Text ?? i.Value.ToString(CultureInfo.InvariantCulture),
        FloatValueSyntax f => f.Token?.Text ?? f.Value.ToString("R", CultureInfo.InvariantCulture),
        BooleanValueSyntax b => b.Value ? "true" : "false",
        _ => value.ToString()?.Trim() ?? "",
    };

    /// <summary>A value as it arrived, with its TOML type where that helps: <c>"abc" (a string)</c>, <c>5 (an integer)</c>.</summary>
    public static string Describe(ValueSyntax? value) => value switch
    {
        null => "nothing",
        StringValueSyntax => $"{RawText(value)} (a string)",
        IntegerValueSyntax => $"{RawText(value)} (an integer)",
        FloatValueSyntax => $"{RawText(value)} (a number)",
        BooleanValueSyntax => $"{RawText(value)} (a boolean)",
        ArraySyntax => "an array",
        InlineTableSyntax => "an inline table",
        DateTimeValueSyntax => $"{RawText(value)} (a date/time)",
        _ => RawText(value),
    };
}
