using System.Text.Json;
using System.Text.Json.Nodes;
using System.Text.Json.Schema;
using System.Text.Json.Serialization.Metadata;

namespace OrderUnfold.Outputs;

/// <summary>
/// JSON Schemas (draft 2020-12) of the JSON files the tool writes, generated from the output records with
/// <see cref="JsonSchemaExporter"/>. The committed copies live in <c>docs/schema/</c>; a test checks they are current.
/// </summary>
public static class OutputSchemas
{
    /// <summary>Each schema file name with the file it describes and the record type.</summary>
    public static IReadOnlyList<(string SchemaFile, string Describes, JsonTypeInfo Type)> All { get; } =
    [
        ("report.schema.json", "report.json", OutputJson.Context.UnfoldReport),
        ("calibration.schema.json", "calibration.json", OutputJson.Context.CalibrationFileRecord),
        ("calibration-report.schema.json", "calibration-report.json", OutputJson.Context.CalibrationReportRecord),
        ("modes.schema.json", "modes.json", OutputJson.Context.ModesReport),
    ];

    /// <summary>The schema text of one record type (indented, ending in a newline).</summary>
    public static string Text(string describes, JsonTypeInfo type)
    {
        var schema = type.GetJsonSchemaAsNode(new JsonSchemaExporterOptions { TreatNullObliviousAsNonNullable = true });
        var root = new JsonObject
        {
            ["$schema"] = "https://json-schema.org/draft/2020-12/schema",
            ["title"] = describes,
            ["description"] = $"{describes} as OrderUnfold writes it; generated from the record {type.Type.Name} (OrderUnfold.Workflow/Outputs). Do not edit: regenerate (docs/outputs.md).",
        };
        foreach (var (key, value) in schema.AsObject().ToList())
        {
            schema.AsObject().Remove(key);
            root[key] = value;
        }

        return root.ToJsonString(new JsonSerializerOptions { WriteIndented = true, Encoder = System.Text.Encodings.Web.JavaScriptEncoder.UnsafeRelaxedJsonEscaping }) + "\n";
    }

    /// <summary>Writes every schema into <paramref name="directory"/>; returns the paths.</summary>
    public static IReadOnlyList<string> WriteAll(string directory)
    {
        Directory.CreateDirectory(directory);
        return All.Select(s =>
        {
            var path = Path.Combine(directory, s.SchemaFile);
            File.WriteAllText(path, Text(s.Describes, s.Type));
            return path;
        }).ToList();
    }
}
