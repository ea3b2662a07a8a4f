using OrderUnfold.Units;

namespace OrderUnfold.Planning;

/// <summary>One length to try for a new cavity.</summary>
/// <param name="LengthM">Mirror spacing, m.</param>
/// <param name="Label">Name of the part in a catalogue, when it came from one.</param>
public sealed record CandidateLength(double LengthM, string? Label = null);

/// <summary>Ways to list candidate lengths: an evenly stepped range or a catalogue file.</summary>
public static class CandidateLengths
{
    /// <summary>Most candidates a range may produce.</summary>
    public const int MaxCount = 200_000;

    /// <summary><paramref name="minM"/>, <paramref name="minM"/> + step, … up to <paramref name="maxM"/> (included
    /// when it lies on the grid within a millionth of a step).</summary>
    public static IReadOnlyList<CandidateLength> Range(double minM, double maxM, double stepM)
    {
        if (!(minM > 0) || !double.IsFinite(minM)) throw new InputException($"the shortest candidate length must be positive but got {Quantity.FormatLength(minM)}");
        if (!(maxM >= minM) || !double.IsFinite(maxM))
            throw new InputException($"the longest candidate length ({Quantity.FormatLength(maxM)}) must not be shorter than the shortest ({Quantity.FormatLength(minM)})");
        if (!(stepM > 0) || !double.IsFinite(stepM)) throw new InputException($"the length step must be positive but got {Quantity.FormatLength(stepM)}");
        var count = (long)Math.Floor((maxM - minM) / stepM + 1e-6) + 1;
        if (count > MaxCount)
            throw new InputException($"{Quantity.FormatLength(minM)} to {Quantity.FormatLength(maxM)} in steps of {Quantity.FormatLength(stepM)} gives {count} candidates, more than the limit of {MaxCount}; use a larger step");
        var list = new List<CandidateLength>((int)count);
        for (long i = 0; i < count; i++) list.Add(new CandidateLength(minM + i * stepM));
        return list;
    }
}
