namespace OrderUnfold.Cli;

/// <summary>
/// A usage error found after parsing, when options are combined in a way the command cannot run (exit code 2).
/// The message names the options at fault; the command's name is put in front of it when it is printed.
/// </summary>
public sealed class UsageException(string message) : Exception(message);
