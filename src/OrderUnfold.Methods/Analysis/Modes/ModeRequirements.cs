using System.Globalization;

namespace OrderUnfold.Analysis.Modes;

/// <summary>Limits a laser must meet, for a pass/fail verdict (a test station). Null limits are not checked.</summary>
/// <param name="MinSmsrDb">Smallest acceptable side-mode suppression ratio, dB.</param>
/// <param name="MaxModes">Largest acceptable number of lines within <see cref="ModeCount.WithinDb"/> of the strongest.</param>
public sealed record ModeRequirements(double? MinSmsrDb = null, int? MaxModes = null)
{
    /// <summary>True when at least one limit is set.</summary>
    public bool Any => MinSmsrDb is not null || MaxModes is not null;
}

/// <summary>The outcome of one requirement.</summary>
/// <param name="Name">"smsr" or "max_modes".</param>
/// <param name="Passed">Whether the laser meets it.</param>
/// <param name="Text">One phrase, e.g. "SMSR 35.2 ± 0.3 dB ≥ 30 dB".</param>
public sealed record RequirementOutcome(string Name, bool Passed, string Text);

/// <summary>The verdict over all stated requirements.</summary>
/// <param name="Passed">True when every requirement is met (or none was stated).</param>
/// <param name="Outcomes">One entry per stated requirement.</param>
/// <param name="Line">One line for a test station: "PASS: …" or "FAIL: …" (failures first).</param>
public sealed record ModeVerdict(bool Passed, IReadOnlyList<RequirementOutcome> Outcomes, string Line);

/// <summary>Checks a mode analysis against requirements.</summary>
public static class ModeCheck
{
    /// <summary>
    /// Checks each stated limit. The SMSR passes when the measured value (or, with no side line seen, the lower
    /// bound from the detection limit) reaches the limit; an SMSR that cannot be bounded fails, since it cannot be
    /// shown to meet the limit. The uncertainty is reported but not subtracted.
    /// </summary>
    public static ModeVerdict Check(ModeAnalysis analysis, ModeRequirements requirements)
    {
        ArgumentNullException.ThrowIfNull(analysis);
        ArgumentNullException.ThrowIfNull(requirements);
        var outcomes = new List<RequirementOutcome>();
        if (requirements.MinSmsrDb is { } min)
        {
            var s = analysis.Smsr;
            var limit = $"{Db(min)} dB";
            outcomes.Add(s.Kind switch
            {
                SmsrKind.Measured => s.ValueDb >= min
                    ? new RequirementOutcome("smsr", true, $"SMSR {WithSigma(s.ValueDb!.Value, s.SigmaDb)} dB ≥ {limit}")
                    : new RequirementOutcome("smsr", false, $"SMSR {WithSigma(s.ValueDb!.Value, s.SigmaDb)} dB < {limit} required"),
                SmsrKind.LowerBound => s.ValueDb >= min
                    ? new RequirementOutcome("smsr", true, $"SMSR ≥ {Db(s.ValueDb!.Value)} dB (no side mode above the detection limit) ≥ {limit}")
                    : new RequirementOutcome("smsr", false,
                        $"SMSR only shown to be ≥ {Db(s.ValueDb!.Value)} dB (no side mode seen, detection limit too high) < {limit} required"),
                _ => new RequirementOutcome("smsr", false, $"SMSR cannot be bounded (one line, no detection limit), {limit} required"),
            });
        }

        if (requirements.MaxModes is { } max)
        {
            var n = analysis.Count.Total;
            var what = $"{n} line{(n == 1 ? "" : "s")} within {Db(analysis.Count.WithinDb)} dB";
            outcomes.Add(n <= max
                ? new RequirementOutcome("max_modes", true, $"{what} ≤ {max}")
                : new RequirementOutcome("max_modes", false, $"{what} > {max} allowed"));
        }

        var passed = outcomes.All(o => o.Passed);
        var line = outcomes.Count == 0
            ? "PASS: no requirement stated"
            : (passed ? "PASS: " : "FAIL: ") + string.Join("; ", outcomes.OrderBy(o => o.Passed).Select(o => o.Text));
        return new ModeVerdict(passed, outcomes, line);
    }

    private static string Db(double v) => v.ToString("0.##", CultureInfo.InvariantCulture);

    /// <summary>"30.97 ± 0.44": rounded to the second significant digit of the sigma; one decimal without a sigma.</summary>
    private static string WithSigma(double v, double? sigma)
    {
        var ci = CultureInfo.InvariantCulture;
        if (sigma is not { } s || !(s > 0) || !double.IsFinite(s)) return v.ToString("0.0", ci);
        var decimals = (int)Math.Clamp(1 - Math.Floor(Math.Log10(s)), 1, 6);
        return $"{v.ToString("F" + decimals, ci)} ± {s.ToString("F" + decimals, ci)}";
    }
}
