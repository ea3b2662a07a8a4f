using System.Text;
using System.Text.Encodings.Web;
using System.Text.Json;
using System.Text.Json.Serialization;
using System.Text.Json.Serialization.Metadata;
using OrderUnfold.Analysis;
using OrderUnfold.Io;

namespace OrderUnfold.Outputs;

/// <summary>An enum written as its snake_case name ("secure", "lower_bound"); read case-insensitively.</summary>
public sealed class SnakeCaseEnumConverter<T>() : JsonStringEnumConverter<T>(JsonNamingPolicy.SnakeCaseLower, allowIntegerValues: false)
    where T : struct, Enum;

/// <summary>
/// The serialiser of every JSON file the unfold, calibrate and modes commands write (source-generated: no reflection):
/// snake_case names, indented, nulls written (a missing value is <c>null</c>, never NaN), enums by name.
/// </summary>
[JsonSourceGenerationOptions(
    PropertyNamingPolicy = JsonKnownNamingPolicy.SnakeCaseLower,
    WriteIndented = true,
    DefaultIgnoreCondition = JsonIgnoreCondition.Never,
    ReadCommentHandling = JsonCommentHandling.Skip,
    AllowTrailingCommas = true,
    Converters = [typeof(SnakeCaseEnumConverter<OrderVerdict>), typeof(SnakeCaseEnumConverter<CavityGeometry>),
        typeof(SnakeCaseEnumConverter<RampDirection>), typeof(SnakeCaseEnumConverter<Pipeline.Batch.ItemStatus>)])]
[JsonSerializable(typeof(UnfoldReport))]
[JsonSerializable(typeof(CalibrationFileRecord))]
[JsonSerializable(typeof(CalibrationReportRecord))]
[JsonSerializable(typeof(ModesReport))]
[JsonSerializable(typeof(Pipeline.Batch.ItemRecord))]
[JsonSerializable(typeof(Pipeline.Batch.BatchStatusFile))]
public sealed partial class OutputJsonContext : JsonSerializerContext;

/// <summary>Writing and reading the output records: one set of options for every file.</summary>
public static class OutputJson
{
    /// <summary>The generated context with readable text (≥, ±, χ are written as themselves, not as \u escapes).</summary>
    public static OutputJsonContext Context { get; } = new(new JsonSerializerOptions(OutputJsonContext.Default.Options)
    {
        Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping,
    });

    /// <summary>The record as indented JSON text ending in a newline.</summary>
    public static string Serialize<T>(T record, Func<OutputJsonContext, JsonTypeInfo<T>> type) =>
        JsonSerializer.Serialize(record, type(Context)) + "\n";

    /// <summary>The snake_case name of an enum value, as the JSON and CSV outputs write it ("secure", "lower_bound").</summary>
    public static string Name<T>(T value) where T : struct, Enum => JsonNamingPolicy.SnakeCaseLower.ConvertName(value.ToString());

    /// <summary>A finite number, or null: no NaN or infinity is ever written.</summary>
    public static double? Finite(double? value) => value is double d && double.IsFinite(d) ? d : null;

    /// <summary>
    /// Reads a record from JSON; a malformed file or a value of the wrong type is an <see cref="InputException"/> naming the
    /// file, the line and column (where the value starts, for a top-level field; else where the parser stopped) and what was
    /// expected at which field.
    /// </summary>
    public static T Deserialize<T>(string file, byte[] json, Func<OutputJsonContext, JsonTypeInfo<T>> type, string what) where T : class
    {
        try
        {
            return JsonSerializer.Deserialize(json, type(Context))
                   ?? throw new InputException($"expected a JSON object ({{ ... }}) at the top of the {what}, got null", file, 1, 1);
        }
        catch (JsonException e)
        {
            var path = e.Path ?? "$";
            var at = path.StartsWith("$.", StringComparison.Ordinal) && path.IndexOfAny(['.', '['], 2) < 0 ? ValuePosition(json, path[2..]) : null;
            throw new InputException(Describe(e, path, type(Context), what), file,
                at?.Line ?? (int)(e.LineNumber ?? 0) + 1, at?.Column ?? (int)(e.BytePositionInLine ?? 0) + 1, e);
        }
    }

    /// <summary>Where the value of a top-level field starts (1-based line and column, in characters), to point a message at
    /// it; null when the field is not there. The values themselves are read through the records.</summary>
    public static (int Line, int Column)? ValuePosition(byte[] json, string field)
    {
        var reader = new Utf8JsonReader(json, new JsonReaderOptions { CommentHandling = JsonCommentHandling.Skip, AllowTrailingCommas = true });
        try
        {
            while (reader.Read())
            {
                if (reader.TokenType != JsonTokenType.PropertyName || reader.CurrentDepth != 1) continue;
                var name = reader.GetString();
                reader.Read();
                if (name == field) return Position(json, reader.TokenStartIndex);
                reader.Skip();
            }
        }
        catch (JsonException)
        {
            // malformed further on: the caller uses the parser's own position
        }

        return null;
    }

    /// <summary>1-based line and column (in characters) of a byte offset.</summary>
    private static (int Line, int Column) Position(byte[] bytes, long offset)
    {
        var line = 1;
        var lineStart = 0;
        var end = (int)Math.Min(offset, bytes.Length);
        for (var i = 0; i < end; i++)
        {
            if (bytes[i] != (byte)'\n') continue;
            line++;
            lineStart = i + 1;
        }

        return (line, Encoding.UTF8.GetCharCount(bytes, lineStart, end - lineStart) + 1);
    }

    /// <summary>Plain words for a parser or conversion failure: what the record expects at that field.</summary>
    private static string Describe(JsonException e, string path, JsonTypeInfo root, string what)
    {
        var message = e.Message;
        if (message.Contains("missing required properties", StringComparison.Ordinal))
            return $"the {what} lacks a required field at \"{(path.StartsWith("$.", StringComparison.Ordinal) ? path[2..] : "the top")}\": {FirstSentence(message)}";
        if (!message.Contains("could not be converted", StringComparison.Ordinal))
            return $"the {what} is not valid JSON: {FirstSentence(message)}";
        if (path == "$") return $"expected a JSON object ({{ ... }}) at the top of the {what}";
        var field = path.StartsWith("$.", StringComparison.Ordinal) ? path[2..] : path;
        return TypeAt(root, field) is { } type ? $"expected {Kind(type)} for \"{field}\"" : $"unexpected value at \"{field}\"";
    }

    /// <summary>The .NET type the record declares at a path such as <c>lines[0].order_verdict</c>.</summary>
    private static Type? TypeAt(JsonTypeInfo root, string path)
    {
        var info = root;
        Type? type = null;
        foreach (var part in path.Split('.'))
        {
            var pieces = part.Split('[');
            var property = info.Properties.FirstOrDefault(p => p.Name == pieces[0]);
            if (property is null) return null;
            type = property.PropertyType;
            for (var i = 1; i < pieces.Length && type is not null; i++)
                type = Context.GetTypeInfo(type)?.ElementType;
            if (type is null) return null;
            info = Context.GetTypeInfo(Nullable.GetUnderlyingType(type) ?? type) ?? info;
        }

        return type;
    }

    /// <summary>What a value of <paramref name="type"/> looks like in JSON, in words.</summary>
    private static string Kind(Type type)
    {
        var t = Nullable.GetUnderlyingType(type) ?? type;
        if (t == typeof(double) || t == typeof(int) || t == typeof(long)) return "a number";
        if (t == typeof(bool)) return "true or false";
        if (t == typeof(string)) return "a string";
        if (t.IsEnum) return "one of " + string.Join(", ", Enum.GetNames(t).Select(n => $"\"{JsonNamingPolicy.SnakeCaseLower.ConvertName(n)}\""));
        if (typeof(System.Collections.IEnumerable).IsAssignableFrom(t)) return "an array";
        return "an object ({ ... })";
    }

    private static string FirstSentence(string message)
    {
        var cut = message.IndexOf(" Path:", StringComparison.Ordinal);
        return (cut > 0 ? message[..cut] : message).TrimEnd();
    }
}
