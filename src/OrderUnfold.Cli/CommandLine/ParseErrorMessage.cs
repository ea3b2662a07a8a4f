using System.CommandLine;
using System.CommandLine.Parsing;

namespace OrderUnfold.Cli.CommandLine;

/// <summary>
/// Turns System.CommandLine's parse errors into one message in the project's style: the command, then what is wrong
/// with which option or argument and what it expects (unknown options list the accepted ones and suggest a near one).
/// </summary>
internal static class ParseErrorMessage
{
    /// <summary>The message for the first problem of <paramref name="parse"/>, or null when it parsed cleanly.</summary>
    public static string? Of(ParseResult parse, IReadOnlyList<string> argv, Command root, IReadOnlyList<Command> verbs)
    {
        var command = parse.CommandResult.Command;
        var unknown = OptionTakenAsArgument(parse, command) ?? parse.UnmatchedTokens.FirstOrDefault();
        var flag = FlagGivenAValue(argv, command, root);
        if (parse.Errors.Count == 0 && unknown is null && flag is null) return null;
        var isRoot = command == root;
        var prefix = isRoot ? "orderunfold: " : $"orderunfold {command.Name}: ";
        if (flag is not null) return prefix + $"{flag} is a flag and takes no value";
        if (unknown is not null) return prefix + Unmatched(unknown, command, isRoot, verbs);
        var error = parse.Errors[0];
        return prefix + error.SymbolResult switch
        {
            ArgumentResult { Parent: CommandResult } r when r.Tokens.Count == 0 => $"missing {r.Argument.Name}: {r.Argument.Description}",
            OptionResult { IdentifierTokenCount: 0 } r => $"{Label(r.Option)} is required",
            OptionResult r when r.Option.ValueType == typeof(bool) => $"{r.Option.Name} is a flag and takes no value",
            OptionResult r when r.Tokens.Count == 0 => $"{r.Option.Name} needs a value ({r.Option.HelpName})",
            OptionResult r when r.Tokens.Count > 1 && r.Option.Arity.MaximumNumberOfValues == 1 => $"{r.Option.Name} is given more than once",
            _ => error.Message,
        };
    }

    /// <summary>
    /// An unknown "--name" that System.CommandLine bound to a command argument (<c>unfold --colour</c> would read
    /// "--colour" as the setup path); null when there is none. Values of options may begin with "--".
    /// </summary>
    private static string? OptionTakenAsArgument(ParseResult parse, Command command) =>
        command.Arguments.Select(a => parse.GetResult(a)).OfType<ArgumentResult>()
            .SelectMany(r => r.Tokens).Select(t => t.Value)
            .FirstOrDefault(v => v.Length > 2 && v.StartsWith("--", StringComparison.Ordinal));

    /// <summary>A flag written with a value (<c>--quiet=yes</c>), which System.CommandLine would split into the flag and an argument.</summary>
    private static string? FlagGivenAValue(IReadOnlyList<string> argv, Command command, Command root)
    {
        var flags = command.Options.Concat(root.Options.Where(o => o.Recursive)).Where(o => o.ValueType == typeof(bool)).Select(o => o.Name).ToHashSet();
        return argv.TakeWhile(a => a != "--")
            .Where(a => a.StartsWith("--", StringComparison.Ordinal) && a.Contains('='))
            .Select(a => a[..a.IndexOf('=')])
            .FirstOrDefault(flags.Contains);
    }

    private static string Unmatched(string token, Command command, bool isRoot, IReadOnlyList<Command> verbs)
    {
        if (isRoot && !token.StartsWith('-'))
            return $"unknown command '{token}'; commands: {string.Join(", ", verbs.Select(v => v.Name))}";
        if (!token.StartsWith("--", StringComparison.Ordinal) && !(token.StartsWith('-') && token.Length == 2))
            return $"unexpected argument '{InputException.Clip(token)}'";

        var name = token.Split('=')[0];
        var options = command.Options.Where(o => o.Name is not "--help").ToList();
        var near = options.Select(o => o.Name).Where(n => Distance(n, name) <= 2 || n.StartsWith(name, StringComparison.Ordinal)).ToList();
        var suggestion = near.Count > 0 ? $" (did you mean {string.Join(" or ", near)}?)" : "";
        var accepted = options.Count > 0 ? $"; accepted: {string.Join(", ", options.Select(Label))}" : "";
        return $"unknown option {InputException.Clip(name)}{suggestion}{accepted}";
    }

    /// <summary>"--out DIR" for an option that takes a value, "--quiet" for a flag.</summary>
    private static string Label(Option option) =>
        option.ValueType == typeof(bool) ? option.Name : $"{option.Name} {option.HelpName ?? "VALUE"}";

    /// <summary>Levenshtein distance (insertions, deletions, substitutions), for suggesting a near option name.</summary>
    private static int Distance(string a, string b)
    {
        var previous = Enumerable.Range(0, b.Length + 1).ToArray();
        for (var i = 1; i <= a.Length; i++)
        {
            var current = new int[b.Length + 1];
            current[0] = i;
            for (var j = 1; j <= b.Length; j++)
                current[j] = Math.Min(Math.Min(current[j - 1] + 1, previous[j] + 1), previous[j - 1] + (a[i - 1] == b[j - 1] ? 0 : 1));
            previous = current;
        }

        return previous[b.Length];
    }
}
