using System.Reflection;
using System.Text.RegularExpressions;
using Xunit;

namespace OrderUnfold.Tests.Architecture;

/// <summary>
/// The layers of DEVELOPERS.md ("Layers"). Between projects the compiler keeps them (a project references only the
/// one below it). These tests keep what the compiler cannot: the order of the namespaces inside the methods layer, and
/// that the two lower layers stay free of files, console, wall clock and static mutable state.
/// </summary>
public sealed class LayerTests
{
    /// <summary>Inside OrderUnfold.Methods, a namespace may use only those before it in this list.</summary>
    private static readonly string[] MethodsOrder = ["Calibration", "Inversion", "Analysis", "Simulation", "Planning"];

    private static readonly Regex NamespaceUse = new(@"\bOrderUnfold\.(Calibration|Inversion|Analysis|Simulation|Planning)\b", RegexOptions.Compiled);

    [Fact]
    public void Inside_the_methods_layer_no_namespace_uses_a_later_one()
    {
        var root = Path.Combine(RepositoryRoot.Folder, "src", "OrderUnfold.Methods");
        var offences = new List<string>();
        foreach (var file in Directory.EnumerateFiles(root, "*.cs", SearchOption.AllDirectories).Where(f => !IsBuildOutput(f)))
        {
            var text = File.ReadAllText(file);
            var own = Regex.Match(text, @"^namespace OrderUnfold\.(\w+)", RegexOptions.Multiline);
            Assert.True(own.Success, $"{file}: no 'namespace OrderUnfold.X;' line");
            var rank = Array.IndexOf(MethodsOrder, own.Groups[1].Value);
            Assert.True(rank >= 0, $"{file}: namespace OrderUnfold.{own.Groups[1].Value} is not one of the methods layer's");
            foreach (Match m in NamespaceUse.Matches(StripComments(text)))
            {
                var used = Array.IndexOf(MethodsOrder, m.Groups[1].Value);
                if (used > rank) offences.Add($"{Path.GetRelativePath(root, file)} ({own.Groups[1].Value}) uses OrderUnfold.{m.Groups[1].Value}");
            }
        }

        Assert.True(offences.Count == 0, "namespaces used out of order:\n" + string.Join("\n", offences.Distinct()));
    }

    [Theory]
    [InlineData("OrderUnfold.Core")]
    [InlineData("OrderUnfold.Methods")]
    public void The_lower_layers_read_no_files_print_nothing_and_read_no_date(string project)
    {
        // Budgets measure elapsed CPU or wall time (Stopwatch, process time): allowed. What is not: files, the console,
        // the date (a report's time stamp belongs to the workflow that writes the report).
        var forbidden = new Regex(@"\b(File|Directory|Console|StreamReader|StreamWriter|FileStream)\.|\bnew (StreamReader|StreamWriter|FileStream)\b|\bDateTime(Offset)?\.(Now|UtcNow|Today)\b",
            RegexOptions.Compiled);
        var offences = LinesMatching(project, forbidden);
        Assert.True(offences.Count == 0, string.Join("\n", offences));
    }

    [Theory]
    [InlineData("OrderUnfold.Core")]
    [InlineData("OrderUnfold.Methods")]
    public void The_lower_layers_hold_no_static_mutable_state(string assemblyName)
    {
        var assembly = Assembly.Load(assemblyName);
        var offences = new List<string>();
        foreach (var type in assembly.GetTypes().Where(t => !t.IsDefined(typeof(System.Runtime.CompilerServices.CompilerGeneratedAttribute)) && !t.Name.Contains('<')))
        {
            const BindingFlags all = BindingFlags.Static | BindingFlags.Public | BindingFlags.NonPublic | BindingFlags.DeclaredOnly;
            foreach (var f in type.GetFields(all))
            {
                // a read-only field (or a getter-only property's hidden backing field) that holds per-flow or per-thread
                // state is ambient state all the same: the cancellation token once lived in a static readonly AsyncLocal
                if (AmbientHolder(f) is { } holder) offences.Add($"{type.FullName}.{f.Name} ({holder})");
                if (f.IsLiteral || f.IsInitOnly || f.Name.Contains('<')) continue;
                offences.Add($"{type.FullName}.{f.Name} (a static field that can be assigned)");
            }

            foreach (var p in type.GetProperties(all))
            {
                if (p.SetMethod is not null) offences.Add($"{type.FullName}.{p.Name} (a static property with a setter)");
            }
        }

        Assert.True(offences.Count == 0, string.Join("\n", offences));
    }

    /// <summary>Why a static field holds ambient state (null: it does not): an AsyncLocal or ThreadLocal value, or a
    /// [ThreadStatic] field.</summary>
    private static string? AmbientHolder(FieldInfo field)
    {
        if (field.IsDefined(typeof(ThreadStaticAttribute))) return "a [ThreadStatic] field";
        var t = field.FieldType;
        if (t.IsGenericType && (t.GetGenericTypeDefinition() == typeof(AsyncLocal<>) || t.GetGenericTypeDefinition() == typeof(ThreadLocal<>)))
            return $"an ambient {t.Name[..t.Name.IndexOf('`')]} value";
        return null;
    }

    [Theory]
    [InlineData("OrderUnfold.Core")]
    [InlineData("OrderUnfold.Methods")]
    public void The_lower_layers_take_their_context_explicitly(string project)
    {
        // Cancellation, progress and limits reach Core and Methods as parameters or inside the options and budgets passed
        // in (DEVELOPERS.md, "Cancellation"): no flow- or thread-local context, wherever it would be declared
        var ambient = new Regex(@"\b(AsyncLocal|ThreadLocal|ThreadStatic|CallContext)\b|\bExecutionContext\.", RegexOptions.Compiled);
        var offences = LinesMatching(project, ambient);
        Assert.True(offences.Count == 0, "ambient context in the lower layers:\n" + string.Join("\n", offences));
    }

    [Fact]
    public void Each_project_references_only_the_layer_below_it()
    {
        // Core → Methods → Workflow → Plotting → Cli (DEVELOPERS.md): the direct project references form that chain.
        string[] chain = ["OrderUnfold.Core", "OrderUnfold.Methods", "OrderUnfold.Workflow", "OrderUnfold.Plotting", "OrderUnfold.Cli"];
        for (var i = 0; i < chain.Length; i++)
        {
            var csproj = File.ReadAllText(Path.Combine(RepositoryRoot.Folder, "src", chain[i], chain[i] + ".csproj"));
            var refs = Regex.Matches(csproj, @"<ProjectReference Include=""[^""]*?([\w.]+)\.csproj""").Select(m => m.Groups[1].Value).ToArray();
            Assert.Equal(i == 0 ? [] : new[] { chain[i - 1] }, refs);
        }
    }

    /// <summary>The code lines (comments stripped) of a project's sources that match <paramref name="pattern"/>, as file:line: text.</summary>
    private static List<string> LinesMatching(string project, Regex pattern)
    {
        var root = Path.Combine(RepositoryRoot.Folder, "src", project);
        return Directory.EnumerateFiles(root, "*.cs", SearchOption.AllDirectories).Where(f => !IsBuildOutput(f))
            .SelectMany(f => StripComments(File.ReadAllText(f)).Split('\n').Select((line, i) => (f, i, line)))
            .Where(x => pattern.IsMatch(x.line))
            .Select(x => $"{Path.GetRelativePath(root, x.f)}:{x.i + 1}: {x.line.Trim()}")
            .ToList();
    }

    private static string StripComments(string text) =>
        Regex.Replace(text, @"//[^\n]*|/\*.*?\*/", "", RegexOptions.Singleline);

    private static bool IsBuildOutput(string path) =>
        path.Contains($"{Path.DirectorySeparatorChar}obj{Path.DirectorySeparatorChar}") || path.Contains($"{Path.DirectorySeparatorChar}bin{Path.DirectorySeparatorChar}");
}
