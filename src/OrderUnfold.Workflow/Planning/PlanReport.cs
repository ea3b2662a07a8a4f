using System.Globalization;
using System.Text;
using OrderUnfold.Units;

namespace OrderUnfold.Planning;

/// <summary>Text and CSV renderings of planner results (no console or file access here).</summary>
public static class PlanReport
{
    private static readonly CultureInfo C = CultureInfo.InvariantCulture;

    /// <summary>
    /// A ranked table of the first <paramref name="top"/> designs: the planned cavities' lengths and FSRs, the worst
    /// alias within tolerance and where it occurs, the nominal worst alias, the first common period, the peak SNR
    /// needed to reject the worst alias, and the verdict.
    /// </summary>
    public static string Table(IReadOnlyList<DesignEvaluation> ranked, int top = 10)
    {
        var rows = new List<string[]>
        {
            new[] { "rank", "length", "FSR", "worst margin", "at Δ", "nominal", "exact repeat", "SNR needed", "verdict" },
        };
        var labels = ranked.Take(top).Any(d => d.Added.Any(a => a.Label is not null));
        if (labels) rows[0] = [.. rows[0], "part"];
        for (var i = 0; i < Math.Min(top, ranked.Count); i++)
        {
            var d = ranked[i];
            var row = new[]
            {
                (i + 1).ToString(C),
                string.Join(" + ", d.Added.Select(a => a.Instrument.LengthM is double l ? Quantity.FormatLength(l) : "—")),
                string.Join(" + ", d.Added.Select(a => Quantity.FormatFrequency(a.Instrument.FsrHz))),
                Linewidths(d.Robust.MarginLinewidths),
                Quantity.FormatFrequency(d.Robust.DeltaHz),
                Linewidths(d.Nominal.MarginLinewidths),
                RepeatText(d),
                Snr(d.RequiredPeakSnr),
                d.VerdictText,
            };
            if (labels) row = [.. row, string.Join(" + ", d.Added.Select(a => a.Label ?? "—"))];
            rows.Add(row);
        }

        return Align(rows, rightAligned: [0, 3, 5, 7]);
    }

    /// <summary>One design in a few lines: cavities, worst alias (within tolerance and nominal), unambiguous
    /// range, common period and the SNR estimate.</summary>
    /// <param name="d">The design.</param>
    /// <param name="unambiguousRangeHz">First shift beyond the central peak where the margin falls below the
    /// threshold (searched beyond the span by the caller), or null when none was found up to
    /// <paramref name="searchedToHz"/>.</param>
    /// <param name="searchedToHz">How far the unambiguous range was searched.</param>
    /// <param name="sampling">The sampling the SNR estimate assumed.</param>
    /// <param name="deltaChiSquare">The χ² increase the SNR estimate asked for.</param>
    public static string Describe(DesignEvaluation d, double? unambiguousRangeHz, double searchedToHz, SweepSampling sampling, double deltaChiSquare)
    {
        var sb = new StringBuilder();
        for (var i = 0; i < d.Cavities.Count; i++)
        {
            var c = d.Cavities[i];
            sb.Append(i == 0 ? "  reference: " : "  planned:   ").Append(c.Instrument.Name).Append(", ").Append(c.Describe())
              .Append(", finesse ").Append(c.Instrument.Finesse.ToString("0.#", C))
              .Append(", linewidth ").Append(Quantity.FormatFrequency(c.Instrument.LinewidthHz));
            if (c.Label is not null) sb.Append(", part ").Append(c.Label);
            sb.AppendLine();
        }

        sb.Append("  worst alias over ").Append(Quantity.FormatFrequency(d.MinimumShiftHz)).Append(" to ").Append(Quantity.FormatFrequency(d.SpanHz)).Append(": ")
          .Append(Linewidths(d.Robust.MarginLinewidths)).Append(" linewidths at Δ = ").Append(Quantity.FormatFrequency(d.Robust.DeltaHz));
        if (d.ToleranceSamples.Any(s => s > 1))
        {
            sb.Append(" for the worst lengths within tolerance (")
              .Append(string.Join(", ", d.RobustLengthsM.Skip(1).Select(l => l is double v ? Quantity.FormatLength(v, 6) : "—")))
              .Append("); nominal ").Append(Linewidths(d.Nominal.MarginLinewidths)).Append(" at ").Append(Quantity.FormatFrequency(d.Nominal.DeltaHz))
              .Append("; ").Append(string.Join("×", d.ToleranceSamples.Where(s => s > 1))).Append(" lengths sampled, sampling error ≤ ")
              .Append(d.SamplingErrorBoundLinewidths.ToString("0.##", C)).Append(" linewidths");
        }

        sb.AppendLine();
        sb.Append("  unambiguous range (margin ≥ ").Append(d.ThresholdLinewidths.ToString("G3", C)).Append(" linewidths): ")
          .AppendLine(unambiguousRangeHz is double u ? Quantity.FormatFrequency(u) : "beyond " + Quantity.FormatFrequency(searchedToHz));
        sb.Append("  exact repeat: ").AppendLine(RepeatText(d, detailed: true));
        sb.Append("  peak SNR needed to reject the worst alias: ").Append(Snr(d.RequiredPeakSnr))
          .Append(" (ideal fit, Δχ² = ").Append(deltaChiSquare.ToString("G3", C)).Append(", ").Append(sampling.SamplesPerFsr.ToString("G4", C))
          .Append(" samples per FSR, ").Append(sampling.PeakPasses.ToString("G3", C)).AppendLine(" peak passes per cavity)");
        sb.Append("  verdict: ").AppendLine(d.VerdictText);
        return sb.ToString();
    }

    /// <summary>The what-if outcome: each line with its match, ghosts, and the verdict.</summary>
    public static string WhatIfSummary(WhatIfResult r)
    {
        var sb = new StringBuilder();
        sb.Append("  unfold window ").Append(Quantity.FormatFrequency(r.WindowStartHz)).Append(" to ").Append(Quantity.FormatFrequency(r.WindowEndHz))
          .Append(" around the strongest line; match tolerance ").AppendLine(Quantity.FormatFrequency(r.MatchToleranceHz));
        foreach (var l in r.Lines)
        {
            sb.Append("  line at ").Append(Quantity.FormatFrequency(l.RelativeHz).PadLeft(12)).Append(" (intensity ").Append(l.RelativeIntensity.ToString("0.###", C)).Append("): ");
            if (l.Found is null) sb.AppendLine("NOT recovered");
            else
                sb.Append("recovered, off by ").Append(Quantity.FormatFrequency(l.ErrorHz!.Value, 3)).Append(", intensity ")
                  .AppendLine(l.Found.Intensity.ToString("0.###", C));
        }

        foreach (var g in r.Ghosts)
            sb.Append("  ghost line at ").Append(Quantity.FormatFrequency(g.FrequencyHz - r.AlignmentHz)).Append(" (intensity ").Append(g.Intensity.ToString("0.###", C)).AppendLine(")");
        if (r.WeakExtras > 0) sb.Append("  ").Append(r.WeakExtras).AppendLine(" weak extra line(s) below the ghost level");
        sb.Append("  result: ").AppendLine(r.Passes ? "every line came back, no ghosts" :
            r.AllRecovered ? $"every line came back, but {r.Ghosts.Count} ghost line(s) appeared" :
            $"{r.Lines.Count(l => l.Found is null)} of {r.Lines.Count} line(s) missing, {r.Ghosts.Count} ghost line(s)");
        return sb.ToString();
    }

    /// <summary>
    /// plan.csv of the designs in the order given: one row per design, SI units named in the headers, the planned
    /// cavities in numbered column groups (cavity2_…, cavity3_…). The columns are <see cref="PlanTable"/>'s.
    /// </summary>
    public static string Csv(IReadOnlyList<DesignEvaluation> designs) => PlanTable.Text(PlanTable.Rows(designs));

    /// <summary>"1000·FSR₁ = 1.499 THz", or "none up to …".</summary>
    public static string RepeatText(DesignEvaluation d, bool detailed = false)
    {
        if (d.Repeat is null) return "none up to " + Quantity.FormatFrequency(d.RepeatSearchLimitHz);
        var text = $"{d.Repeat.Multiple}·FSR₁ = {Quantity.FormatFrequency(d.Repeat.RepeatHz)}";
        if (!detailed) return text;
        var others = string.Join(" = ", d.Repeat.OtherMultiples.Select((m, k) => $"{m}·FSR{Subscript(k + 2)}"));
        var inSpan = d.Repeat.RepeatHz <= d.SpanHz ? " (inside the span: an exact alias)" : " (beyond the span)";
        return $"{text} = {others}{inSpan}";
    }

    private static string Subscript(int n) => string.Concat(n.ToString(C).Select(ch => (char)('₀' + (ch - '0'))));

    private static string Linewidths(double v) => double.IsFinite(v) ? v.ToString("0.00", C) : "n/a";

    private static string Snr(double v) => double.IsPositiveInfinity(v) ? "∞" : v >= 100 ? v.ToString("0", C) : v.ToString("0.0#", C);

    private static string Align(List<string[]> rows, int[] rightAligned)
    {
        var cols = rows.Max(r => r.Length);
        var width = new int[cols];
        foreach (var r in rows)
            for (var c = 0; c < r.Length; c++) width[c] = Math.Max(width[c], r[c].Length);
        var sb = new StringBuilder();
        foreach (var r in rows)
        {
            var cells = r.Select((cell, c) => rightAligned.Contains(c) ? cell.PadLeft(width[c]) : cell.PadRight(width[c]));
            sb.AppendLine(("  " + string.Join("  ", cells)).TrimEnd());
        }

        return sb.ToString();
    }
}
