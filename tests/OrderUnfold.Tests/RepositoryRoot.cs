namespace OrderUnfold.Tests;

/// <summary>The repository root: the first folder above the test assembly that holds OrderUnfold.sln.</summary>
internal static class RepositoryRoot
{
    /// <summary>The root folder's full path.</summary>
    public static string Folder { get; } = Find();

    private static string Find()
    {
        for (var d = new DirectoryInfo(AppContext.BaseDirectory); d is not null; d = d.Parent)
        {
            if (File.Exists(Path.Combine(d.FullName, "OrderUnfold.sln"))) return d.FullName;
        }

        throw new DirectoryNotFoundException($"OrderUnfold.sln not found above {AppContext.BaseDirectory}");
    }
}
