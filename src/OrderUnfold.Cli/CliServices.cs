using OrderUnfold.Analysis.Modes;
using OrderUnfold.Pipeline;
using OrderUnfold.Pipeline.Batch;

namespace OrderUnfold.Cli;

/// <summary>
/// What the commands need from the layers below that a caller may replace (tests do): passed to every command
/// through <see cref="CliContext"/>, never kept in a static.
/// </summary>
public sealed record CliServices
{
    /// <summary>The services of the program as shipped: the unfold pipeline and the laser-mode analysis.</summary>
    public static CliServices Default { get; } = new();

    /// <summary>Runs the unfold for a setup file (stopped by the token) and returns its line list for <c>modes SETUP.toml</c>.</summary>
    public Func<string, CancellationToken, ModeInput> UnfoldForModes { get; init; } =
        (path, cancellationToken) => ModeInputs.FromRun(UnfoldPipeline.Run(path, cancellationToken: cancellationToken));

    /// <summary>The per-item analysis whose numbers fill the batch summary's mode columns.</summary>
    public IItemAnalysis BatchItemAnalysis { get; init; } = ModeItemAnalysis.Instance;
}

/// <summary>One run of the program: where it prints and the services its commands use.</summary>
/// <param name="Out">Results and summaries.</param>
/// <param name="Error">Progress, warnings and error messages.</param>
/// <param name="Services">Dependencies of the commands.</param>
internal sealed record CliContext(TextWriter Out, TextWriter Error, CliServices Services);
