using System.CommandLine;
using System.Globalization;
using OrderUnfold.Io;
using OrderUnfold.Simulation;

namespace OrderUnfold.Cli.CommandLine;

/// <summary>
/// The options more than one command takes, declared here once so that their names, value names, checks and
/// wording are the same everywhere. Each call makes a new option for one command; the command states its default
/// where it differs (the folder an <c>--out</c> defaults to, for instance).
/// </summary>
internal static class SharedOptions
{
    /// <summary>Name of the flag that turns the PNG plots off (every command that draws plots takes it).</summary>
    public const string NoPlotsName = "--no-plots";

    /// <summary><c>--out DIR</c>: where the command writes; required when there is no <paramref name="defaultFolder"/>.</summary>
    public static Option<string?> Out(string? defaultFolder)
    {
        var option = ValueOptions.Text("--out", "DIR", defaultFolder is null ? "output folder" : $"output folder (default: {defaultFolder})");
        option.Required = defaultFolder is null;
        return option;
    }

    /// <summary><c>--no-plots</c>: no PNG files.</summary>
    public static Option<bool> NoPlots(string description = "do not draw the PNG plots (faster)") => ValueOptions.Flag(NoPlotsName, description);

    /// <summary><c>--quiet</c>: no progress lines on standard error.</summary>
    public static Option<bool> Quiet(string more = "") => ValueOptions.Flag("--quiet", "no progress display" + more);

    /// <summary><c>--calibration FILE</c>: a calibration written by <c>calibrate</c> to reuse.</summary>
    public static Option<string?> Calibration(string description) => ValueOptions.Text("--calibration", "FILE", description);

    /// <summary><c>--setup FILE</c>: a setup file (TOML, docs/setup.md).</summary>
    public static Option<string?> Setup(string description) => ValueOptions.Text("--setup", "FILE", description);

    /// <summary><c>--jobs N</c>: items at once.</summary>
    public static Option<int?> Jobs() =>
        ValueOptions.WholeNumber("--jobs", "N", $"items at once (default: the number of cores, here {Environment.ProcessorCount.ToString(CultureInfo.InvariantCulture)})", min: 1);

    /// <summary><c>--seed N</c>: seed of the simulated noise.</summary>
    public static Option<int?> Seed(string defaultText) => ValueOptions.WholeNumber("--seed", "N", $"seed of the random numbers (default {defaultText})");

    /// <summary><c>--noise F</c>: noise σ as a fraction of the peak signal, zero or more.</summary>
    public static Option<double?> Noise(string defaultText) =>
        ValueOptions.Create<double>("--noise", "F", $"noise σ as a fraction of the peak signal (default {defaultText})", (string text, out double value, out string problem) =>
        {
            var ok = double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out value) && value >= 0 && double.IsFinite(value);
            problem = ok ? "" : $"expects a fraction of the peak signal, zero or more, but got '{InputException.Clip(text)}'";
            return ok;
        });

    /// <summary><c>--finesse N</c> and the like: a finesse of at least 1.</summary>
    public static Option<double?> Finesse(string name, string description) =>
        ValueOptions.Create<double>(name, "N", description, (string text, out double value, out string problem) =>
        {
            var ok = double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out value) && value >= 1 && double.IsFinite(value);
            problem = ok ? "" : $"expects a finesse of at least 1 but got '{InputException.Clip(text)}'";
            return ok;
        });

    /// <summary><c>--geometry</c> and the like: the names of <see cref="CavityGeometryNames"/> (the one table of them).</summary>
    public static Option<CavityGeometry?> Geometry(string name, string description) =>
        ValueOptions.Choice(name, description, CavityGeometryNames.ByName.Select(kv => (kv.Key, kv.Value)).ToArray());

    /// <summary><c>--lines</c>: the lines of a simulated source, in the one syntax of <see cref="LineList"/>.</summary>
    public static Option<IReadOnlyList<SimulatedLine>?> Lines(string description) =>
        new("--lines")
        {
            HelpName = LineList.Syntax,
            Description = $"{description}: frequency, relative intensity after ':' (default 1), intrinsic Lorentzian FWHM after a second ':' (default 0), e.g. \"{LineList.Example}\"",
            CustomParser = result =>
            {
                if (result.Tokens.Count == 0) return null;
                if (LineList.TryParse(result.Tokens[^1].Value, out var lines, out var problem)) return lines;
                result.AddError($"--lines: {problem}");
                return null;
            },
        };

    /// <summary><c>--max-file-size SIZE</c> (every command): the largest input file read.</summary>
    public static Option<long?> MaxFileSize() =>
        ValueOptions.Create<long>(InputLimits.MaxFileSizeOption, "SIZE",
            $"largest input file read (default {InputLimits.FormatBytes(InputLimits.Default.MaxFileBytes)})",
            (string text, out long value, out string problem) =>
            {
                var bytes = InputLimits.ParseBytes(text);
                value = bytes ?? 0;
                problem = bytes is null ? $"expects a size such as \"512 MiB\" or \"2 GB\" but got '{InputLimits.Clip(text)}'" : "";
                return bytes is not null;
            });

    /// <summary><c>--max-line-length N</c> (every command): the longest line of a text input.</summary>
    public static Option<int?> MaxLineLength() =>
        ValueOptions.Create<int>(InputLimits.MaxLineLengthOption, "N",
            $"longest line of a text input, in characters (default {InputLimits.Default.MaxLineChars.ToString(CultureInfo.InvariantCulture)})",
            (string text, out int value, out string problem) =>
            {
                var ok = int.TryParse(text, NumberStyles.Integer, CultureInfo.InvariantCulture, out value) && value >= 80;
                problem = ok ? "" : $"expects a whole number of characters ≥ 80 but got '{InputLimits.Clip(text)}'";
                return ok;
            });

    /// <summary><c>--allow-outside-paths</c> (every command): setups and manifests may name files outside their folder.</summary>
    public static Option<bool> AllowOutsidePaths() =>
        ValueOptions.Flag(InputLimits.AllowOutsidePathsOption, "let setups and manifests name files outside their own folder");
}
