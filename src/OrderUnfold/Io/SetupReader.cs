namespace OrderUnfold.Io;

/// <summary>Reads and validates a TOML setup file; writes the commented template.</summary>
public static class SetupReader
{
    /// <summary>Reads a setup. Throws <see cref="InputException"/> (file, line, column) on any problem.</summary>
    public static Setup Read(string path) => throw new NotImplementedException("SetupReader.Read");

    /// <summary>The commented template that <c>orderunfold init</c> writes.</summary>
    public static string Template() => throw new NotImplementedException("SetupReader.Template");
}
