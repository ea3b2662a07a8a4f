namespace OrderUnfold.Io;

/// <summary>Writes a setup as TOML (placeholder until the setup reader lands).</summary>
public static class SetupWriter
{
    public static string Write(Setup setup, string setupDirectory) => throw new NotImplementedException("SetupWriter.Write");
}
