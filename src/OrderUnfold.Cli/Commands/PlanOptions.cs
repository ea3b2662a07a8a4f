using System.CommandLine;
using System.Globalization;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Simulation;

namespace OrderUnfold.Cli.Commands;

/// <summary>The options of <c>plan</c>, in the order its help lists them (reference cavity, aim, candidates, a given design, output, what-if).</summary>
internal sealed class PlanOptions
{
    public Option<double?> FirstLength { get; } = ValueOptions.Quantity("--first-length", Dimension.Length, "LEN", "the cavity you have, by its length, e.g. \"100 mm\"", positive: true);
    public Option<double?> FirstFsr { get; } = ValueOptions.Quantity("--first-fsr", Dimension.Frequency, "FREQ", "the cavity you have, by its FSR, e.g. \"1.5 GHz\"", positive: true);
    public Option<CavityGeometry?> FirstGeometry { get; } = SharedOptions.Geometry("--first-geometry", "geometry of the cavity you have (default planar)");
    public Option<double?> Finesse { get; } = SharedOptions.Finesse("--finesse", "finesse of the cavity you have (required with --first-length or --first-fsr)");
    public Option<string?> Setup { get; } = SharedOptions.Setup("instead of --first-*: the cavities of a setup file (the first is the reference)");
    public Option<double?> Span { get; } = ValueOptions.Quantity("--span", Dimension.Frequency, "FREQ", "largest shift that must be unambiguous, e.g. \"20 GHz\"");
    public Option<double?> Margin { get; } = ValueOptions.Number("--margin", "N", "required alias margin in linewidths (default 3)", positive: true);
    public Option<double?> MinShift { get; } = ValueOptions.Quantity("--min-shift", Dimension.Frequency, "FREQ", "shifts below this are the line itself (default 2 × margin × narrowest linewidth)");
    public Option<double?> SecondMin { get; } = ValueOptions.Quantity("--second-min", Dimension.Length, "LEN", "shortest candidate length, e.g. \"80 mm\"", positive: true);
    public Option<double?> SecondMax { get; } = ValueOptions.Quantity("--second-max", Dimension.Length, "LEN", "longest candidate length, e.g. \"120 mm\"", positive: true);
    public Option<double?> Step { get; } = ValueOptions.Quantity("--step", Dimension.Length, "LEN", "step between candidate lengths, e.g. \"0.1 mm\"", positive: true);
    public Option<string?> Catalogue { get; } = ValueOptions.Text("--catalogue", "FILE", "candidate lengths, one per line (\"93.7 mm\" or \"93.7 mm, part label\"); # starts a comment");
    public Option<CavityGeometry?> SecondGeometry { get; } = SharedOptions.Geometry("--second-geometry", "geometry of the candidates (default: that of the reference)");
    public Option<double?> SecondFinesse { get; } = SharedOptions.Finesse("--second-finesse", "finesse of the candidates (default: that of the reference)");
    public Option<double?> Tolerance { get; } = ValueOptions.Create<double>("--tolerance", "LEN", "length tolerance of the part to be made, e.g. \"0.05 mm\" (default 0)",
        (string text, out double value, out string problem) =>
        {
            if (!Quantity.TryParse(text, Dimension.Length, out value, out problem))
            {
                problem = ": " + problem;
                return false;
            }

            problem = value >= 0 ? "" : $"must not be negative but got '{InputException.Clip(text)}'";
            return value >= 0;
        });
    public Option<bool> Third { get; } = ValueOptions.Flag("--third", "also search three-cavity designs (done anyway when no two-cavity design passes)");
    public Option<double?> SecondLength { get; } = ValueOptions.Quantity("--second-length", Dimension.Length, "LEN", "a given second cavity to judge, by its length", positive: true);
    public Option<double?> SecondFsr { get; } = ValueOptions.Quantity("--second-fsr", Dimension.Frequency, "FREQ", "a given second cavity to judge, by its FSR", positive: true);
    public Option<double?> ThirdLength { get; } = ValueOptions.Quantity("--third-length", Dimension.Length, "LEN", "a given third cavity, by its length", positive: true);
    public Option<double?> ThirdFsr { get; } = ValueOptions.Quantity("--third-fsr", Dimension.Frequency, "FREQ", "a given third cavity, by its FSR", positive: true);
    public Option<string?> Out { get; } = SharedOptions.Out("./plan-out");
    public Option<bool> NoPlots { get; } = SharedOptions.NoPlots("do not draw margin.png and candidates.png");
    public Option<int?> Top { get; } = ValueOptions.WholeNumber("--top", "N", "rows of the printed table (default 10)", min: 1);
    public Option<double?> SamplesPerFsr { get; } = ValueOptions.Number("--samples-per-fsr", "N", "sweep sampling assumed by the SNR estimate (default 1250)", positive: true);
    public Option<double?> Passes { get; } = ValueOptions.Number("--passes", "N", "peak passes assumed by the SNR estimate (default 6)", positive: true);
    public Option<bool> Simulate { get; } = ValueOptions.Flag("--simulate", "what-if: simulate the recommended design with --lines and unfold it");
    public Option<IReadOnlyList<SimulatedLine>?> Lines { get; } = SharedOptions.Lines("the source's lines for --simulate");
    public Option<double?> Noise { get; } = SharedOptions.Noise("0.004");
    public Option<int?> Samples { get; } = ValueOptions.WholeNumber("--samples", "N", "samples per simulated record (default 4000)", min: 100);
    public Option<int?> Seed { get; } = SharedOptions.Seed("1");

    /// <summary>Every option, in help order.</summary>
    public IEnumerable<Option> All =>
    [
        FirstLength, FirstFsr, FirstGeometry, Finesse, Setup, Span, Margin, MinShift, SecondMin, SecondMax, Step, Catalogue, SecondGeometry,
        SecondFinesse, Tolerance, Third, SecondLength, SecondFsr, ThirdLength, ThirdFsr, Out, NoPlots, Top, SamplesPerFsr, Passes,
        Simulate, Lines, Noise, Samples, Seed,
    ];

    /// <summary>The what-if options other than --simulate itself.</summary>
    public IEnumerable<Option> WhatIf => [Lines, Noise, Samples, Seed];

    /// <summary>Formats a finesse or margin for the printed header.</summary>
    public static string Number(double value, string format = "0.#") => value.ToString(format, CultureInfo.InvariantCulture);
}
