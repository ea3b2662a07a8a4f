using OrderUnfold.Units;

namespace OrderUnfold.Cli;

/// <summary>A usage error on the command line (exit code 2).</summary>
public sealed class UsageException(string message) : Exception(message);

/// <summary>
/// Minimal command-line parser: positionals, <c>--name value</c>, <c>--name=value</c> and flags.
/// Each command declares which options take values and which are flags; anything else is a usage error.
/// </summary>
public sealed class Args
{
    private readonly Dictionary<string, string> _values = new(StringComparer.Ordinal);
    private readonly HashSet<string> _flags = new(StringComparer.Ordinal);
    private readonly HashSet<string> _used = new(StringComparer.Ordinal);

    public Args(string command, IEnumerable<string> args, IEnumerable<string> valueOptions, IEnumerable<string> flagOptions)
    {
        Command = command;
        var values = valueOptions.ToHashSet();
        var flags = flagOptions.ToHashSet();
        var list = args.ToList();
        for (var i = 0; i < list.Count; i++)
        {
            var a = list[i];
            if (a.StartsWith("--", StringComparison.Ordinal) && a.Length > 2)
            {
                var name = a[2..];
                string? inline = null;
                var eq = name.IndexOf('=');
                if (eq >= 0)
                {
                    inline = name[(eq + 1)..];
                    name = name[..eq];
                }

                if (flags.Contains(name))
                {
                    if (inline is not null) throw new UsageException($"{command}: --{name} is a flag and takes no value");
                    _flags.Add(name);
                }
                else if (values.Contains(name))
                {
                    var v = inline ?? (i + 1 < list.Count ? list[++i] : throw new UsageException($"{command}: --{name} needs a value"));
                    _values[name] = v;
                }
                else
                {
                    var known = values.Select(v => "--" + v + " VALUE").Concat(flags.Select(f => "--" + f));
                    throw new UsageException($"{command}: unknown option --{name}; accepted: {string.Join(", ", known)}");
                }
            }
            else
            {
                Positionals.Add(a);
            }
        }
    }

    public string Command { get; }
    public List<string> Positionals { get; } = [];

    public bool Flag(string name) => _flags.Contains(name);

    public string? Value(string name) => _values.TryGetValue(name, out var v) ? v : null;

    public string Positional(int index, string what)
    {
        if (index < Positionals.Count) return Positionals[index];
        throw new UsageException($"{Command}: missing {what}");
    }

    public void NoMorePositionals(int count)
    {
        if (Positionals.Count > count) throw new UsageException($"{Command}: unexpected argument '{Positionals[count]}'");
    }

    public double? Quantity(string name, Dimension dimension)
    {
        var v = Value(name);
        if (v is null) return null;
        if (!Units.Quantity.TryParse(v, dimension, out var value, out var error)) throw new UsageException($"{Command}: --{name}: {error}");
        return value;
    }

    public int? Int(string name, int min = int.MinValue)
    {
        var v = Value(name);
        if (v is null) return null;
        if (!int.TryParse(v, System.Globalization.NumberStyles.Integer, System.Globalization.CultureInfo.InvariantCulture, out var i) || i < min)
            throw new UsageException($"{Command}: --{name} expects a whole number ≥ {min} but got '{v}'");
        return i;
    }

    public double? Double(string name)
    {
        var v = Value(name);
        if (v is null) return null;
        if (!double.TryParse(v, System.Globalization.NumberStyles.Float, System.Globalization.CultureInfo.InvariantCulture, out var d) || !double.IsFinite(d))
            throw new UsageException($"{Command}: --{name} expects a number but got '{v}'");
        return d;
    }
}
