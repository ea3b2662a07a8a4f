using Microsoft.CodeAnalysis;
using Microsoft.CodeAnalysis.CSharp;
using Microsoft.CodeAnalysis.CSharp.Syntax;
using Xunit;

namespace OrderUnfold.Tests.Architecture;

/// <summary>
/// Size limits of the project's own code (DEVELOPERS.md, "Conventions"): no source file over 600 lines, no method,
/// constructor, accessor or operator over 80 lines (from its signature to its closing brace, local functions and
/// lambdas inside it included; leading comments not counted). The sources are parsed with Roslyn, so braces in
/// strings and comments cannot fool the count.
/// </summary>
public sealed class CodeSizeTests
{
    public const int MaxFileLines = 600;
    public const int MaxMemberLines = 80;

    [Fact]
    public void No_source_file_is_longer_than_the_limit()
    {
        var offences = SourceFiles()
            .Select(f => (File: f, Lines: File.ReadAllLines(f).Length))
            .Where(x => x.Lines > MaxFileLines)
            .Select(x => $"{Relative(x.File)}: {x.Lines} lines")
            .ToList();
        Assert.True(offences.Count == 0, $"files over {MaxFileLines} lines:\n" + string.Join("\n", offences));
    }

    [Fact]
    public void No_member_is_longer_than_the_limit()
    {
        var offences = SourceFiles().SelectMany(MemberLengths)
            .Where(x => x.Lines > MaxMemberLines)
            .OrderByDescending(x => x.Lines)
            .Select(x => $"{x.Where}: {x.Name} {x.Lines} lines")
            .ToList();
        Assert.True(offences.Count == 0, $"members over {MaxMemberLines} lines:\n" + string.Join("\n", offences));
    }

    /// <summary>Every method-like member of a file (methods, constructors, operators, accessors) with its length in lines.</summary>
    public static IEnumerable<(string Where, string Name, int Lines)> MemberLengths(string file)
    {
        var tree = CSharpSyntaxTree.ParseText(File.ReadAllText(file), path: file);
        foreach (var node in tree.GetRoot().DescendantNodes())
        {
            string? name = node switch
            {
                MethodDeclarationSyntax m => m.Identifier.Text,
                ConstructorDeclarationSyntax c => c.Identifier.Text + " (constructor)",
                OperatorDeclarationSyntax o => "operator " + o.OperatorToken.Text,
                AccessorDeclarationSyntax a when a.Parent?.Parent is BasePropertyDeclarationSyntax p => Describe(p) + "." + a.Keyword.Text,
                PropertyDeclarationSyntax { ExpressionBody: not null } p => p.Identifier.Text,
                _ => null,
            };
            if (name is null) continue;
            var span = node.GetLocation().GetLineSpan();
            // the span starts at the first token (leading comments and attributes' trivia are not part of it)
            var lines = span.EndLinePosition.Line - span.StartLinePosition.Line + 1;
            var type = node.Ancestors().OfType<BaseTypeDeclarationSyntax>().FirstOrDefault()?.Identifier.Text ?? "";
            yield return ($"{Relative(file)}:{span.StartLinePosition.Line + 1}", type.Length > 0 ? type + "." + name : name, lines);
        }
    }

    private static string Describe(BasePropertyDeclarationSyntax p) => p switch
    {
        PropertyDeclarationSyntax prop => prop.Identifier.Text,
        IndexerDeclarationSyntax => "this[]",
        EventDeclarationSyntax e => e.Identifier.Text,
        _ => "property",
    };

    public static IEnumerable<string> SourceFiles()
    {
        var src = Path.Combine(RepositoryRoot.Folder, "src");
        var sep = Path.DirectorySeparatorChar;
        return Directory.EnumerateFiles(src, "*.cs", SearchOption.AllDirectories)
            .Where(f => !f.Contains($"{sep}obj{sep}") && !f.Contains($"{sep}bin{sep}"))
            .Order(StringComparer.Ordinal);
    }

    private static string Relative(string file) => Path.GetRelativePath(RepositoryRoot.Folder, file);
}
