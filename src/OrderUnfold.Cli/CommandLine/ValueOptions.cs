using System.CommandLine;
using System.CommandLine.Parsing;
using System.Globalization;

namespace OrderUnfold.Cli.CommandLine;

/// <summary>Converts an option's text to its value, or says what was expected (the message follows the option's name).</summary>
internal delegate bool TryConvert<T>(string text, out T value, out string problem);

/// <summary>
/// Options whose text is checked while the command line is parsed, with the project's wording: a wrong value is a
/// parse error naming the option and what it expects (exit code 2 before anything runs). Values are null when the
/// option is not given, so each command states its own default.
/// </summary>
internal static class ValueOptions
{
    /// <summary>An option converted by <paramref name="convert"/>; its problems read "--name problem" (or "--name: problem" when the problem starts with ':').</summary>
    public static Option<T?> Create<T>(string name, string helpName, string description, TryConvert<T> convert) where T : struct =>
        new(name)
        {
            HelpName = helpName,
            Description = description,
            CustomParser = result =>
            {
                if (result.Tokens.Count == 0) return null;
                if (convert(result.Tokens[^1].Value, out var value, out var problem)) return value;
                result.AddError(problem.StartsWith(':') ? name + problem : $"{name} {problem}");
                return null;
            },
        };

    /// <summary>A text option (a path, a name): any text is accepted.</summary>
    public static Option<string?> Text(string name, string helpName, string description) =>
        new(name) { HelpName = helpName, Description = description };

    /// <summary>A flag: present or not; it takes no value.</summary>
    public static Option<bool> Flag(string name, string description) => new(name) { Description = description };

    /// <summary>A physical quantity with its unit ("20 GHz", "0.05 mm", "30dB"), in SI units; optionally positive only.</summary>
    public static Option<double?> Quantity(string name, Dimension dimension, string helpName, string description, bool positive = false) =>
        Create<double>(name, helpName, description, (string text, out double value, out string problem) =>
        {
            if (!Units.Quantity.TryParse(text, dimension, out value, out problem))
            {
                problem = ": " + problem;
                return false;
            }

            return !positive || Positive(text, value, out problem);
        });

    /// <summary>A plain number (no unit); optionally positive only.</summary>
    public static Option<double?> Number(string name, string helpName, string description, bool positive = false) =>
        Create<double>(name, helpName, description, (string text, out double value, out string problem) =>
        {
            if (!double.TryParse(text, NumberStyles.Float, CultureInfo.InvariantCulture, out value) || !double.IsFinite(value))
            {
                problem = $"expects a number but got '{InputException.Clip(text)}'";
                return false;
            }

            problem = "";
            return !positive || Positive(text, value, out problem);
        });

    /// <summary>A whole number of at least <paramref name="min"/> (and at most <paramref name="max"/>).</summary>
    public static Option<int?> WholeNumber(string name, string helpName, string description, int min = int.MinValue, int max = int.MaxValue) =>
        Create<int>(name, helpName, description, (string text, out int value, out string problem) =>
        {
            problem = "";
            if (int.TryParse(text, NumberStyles.Integer, CultureInfo.InvariantCulture, out value) && value >= min && value <= max) return true;
            var range = max == int.MaxValue ? $"≥ {min}" : $"from {min} to {max}";
            problem = min == int.MinValue ? $"expects a whole number but got '{InputException.Clip(text)}'" : $"expects a whole number {range} but got '{InputException.Clip(text)}'";
            return false;
        });

    /// <summary>One word out of a fixed list (case-insensitive), e.g. planar|confocal.</summary>
    public static Option<T?> Choice<T>(string name, string description, params (string Word, T Value)[] choices) where T : struct
    {
        var words = choices.Select(c => c.Word).ToList();
        var expected = words.Count == 2 ? $"{words[0]} or {words[1]}" : string.Join(", ", words[..^1]) + " or " + words[^1];
        return Create<T>(name, string.Join('|', words), description, (string text, out T value, out string problem) =>
        {
            var match = choices.Where(c => string.Equals(c.Word, text.Trim(), StringComparison.OrdinalIgnoreCase)).ToList();
            value = match.Count == 1 ? match[0].Value : default;
            problem = match.Count == 1 ? "" : $"expects {expected} but got '{InputException.Clip(text)}'";
            return match.Count == 1;
        });
    }

    /// <summary>One word out of a list known at run time (case-insensitive); the value is the word as listed.</summary>
    public static Option<string?> Word(string name, string description, IReadOnlyList<string> words)
    {
        var expected = string.Join(", ", words.Take(words.Count - 1)) + " or " + words[^1];
        return new Option<string?>(name)
        {
            HelpName = string.Join('|', words),
            Description = description,
            CustomParser = result =>
            {
                if (result.Tokens.Count == 0) return null;
                var text = result.Tokens[^1].Value;
                var match = words.FirstOrDefault(w => string.Equals(w, text.Trim(), StringComparison.OrdinalIgnoreCase));
                if (match is null) result.AddError($"{name} expects {expected} but got '{InputException.Clip(text)}'");
                return match;
            },
        };
    }

    private static bool Positive(string text, double value, out string problem)
    {
        problem = value > 0 ? "" : $"must be positive but got '{InputException.Clip(text)}'";
        return value > 0;
    }
}
