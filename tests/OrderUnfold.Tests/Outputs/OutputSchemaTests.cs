using OrderUnfold.Outputs;
using Xunit;

namespace OrderUnfold.Tests.Outputs;

/// <summary>
/// The JSON Schemas committed under docs/schema/ are the ones the output records generate. To regenerate them after a
/// change to a record: <c>ORDERUNFOLD_WRITE_SCHEMAS=1 dotnet test -c Release --filter FullyQualifiedName~OutputSchemaTests</c>
/// (docs/outputs.md).
/// </summary>
public sealed class OutputSchemaTests
{
    private static string SchemaDirectory() => Path.Combine(RepositoryRoot.Folder, "docs", "schema");

    public static TheoryData<string> SchemaFiles() => new(OutputSchemas.All.Select(s => s.SchemaFile));

    [Theory]
    [MemberData(nameof(SchemaFiles))]
    public void CommittedSchema_IsCurrent(string schemaFile)
    {
        var dir = SchemaDirectory();
        if (Environment.GetEnvironmentVariable("ORDERUNFOLD_WRITE_SCHEMAS") == "1") OutputSchemas.WriteAll(dir);
        var (_, describes, type) = OutputSchemas.All.Single(s => s.SchemaFile == schemaFile);
        var path = Path.Combine(dir, schemaFile);
        Assert.True(File.Exists(path), $"{path} is missing: regenerate the schemas (docs/outputs.md)");
        Assert.True(OutputSchemas.Text(describes, type) == File.ReadAllText(path).ReplaceLineEndings("\n"),
            $"{path} is out of date with the output records: regenerate the schemas (docs/outputs.md)");
    }
}
