using System.Globalization;
using OrderUnfold.Analysis.Modes;

namespace OrderUnfold.Cli.Commands;

/// <summary>The plain-text summary <c>modes</c> prints: comb, spacing, folded candidates, count, SMSR, envelope.</summary>
internal static class ModeSummary
{
    /// <summary>A residual in Hz: "&lt; 1 Hz" below one hertz (a noise-free comb), else three digits.</summary>
    private static string Small(double hz) => hz < 1 ? "< 1 Hz" : Quantity.FormatFrequency(hz, 3);

    /// <summary>Prints the analysis of the lines read from <paramref name="source"/>.</summary>
    public static void Print(TextWriter o, ModeAnalysis a, string source)
    {
        var ci = CultureInfo.InvariantCulture;
        o.WriteLine($"modes: {a.Lines.Count} line{(a.Lines.Count == 1 ? "" : "s")} from {source} " +
                    $"({(a.OrdersResolved ? "orders resolved" : "one cavity: positions folded")})");
        if (a.Comb is { } c)
        {
            var missing = c.MissingK.Count == 0 ? "none missing" : $"missing k = {string.Join(", ", c.MissingK.Select(k => k.ToString("+0;-0;0", ci)))}";
            o.WriteLine($"  comb: {c.MemberCount} modes, k = {c.FirstK.ToString("+0;-0;0", ci)} … {c.LastK.ToString("+0;-0;0", ci)}, {missing}; " +
                        $"irregularity rms {Small(c.RmsResidualHz)}, max {Small(c.MaxAbsResidualHz)}");
        }
        else
        {
            o.WriteLine("  comb: none");
        }

        if (a.Spacing is { } s)
        {
            o.WriteLine($"  spacing {WithSigma(s.SpacingHz, s.SigmaHz, Quantity.FormatFrequency)}; optical length c/(2Δ) " +
                        WithSigma(s.OpticalLengthM, s.OpticalLengthSigmaM, Quantity.FormatLength) +
                        (s.PhysicalLengthM is { } l ? $"; physical length {WithSigma(l, s.PhysicalLengthSigmaM, Quantity.FormatLength)} at group index {s.GroupIndex!.Value.ToString("0.###", ci)}" : ""));
        }

        if (a.Folded is { } f)
        {
            o.WriteLine($"  folded: spacing ≡ ±{Quantity.FormatFrequency(f.FoldedStepHz)} modulo FSR {Quantity.FormatFrequency(f.FsrHz)}");
            o.WriteLine($"  {f.ChoiceReason}");
            if (f.Chosen is null)
            {
                var shown = f.Candidates.Where(x => x.Divisor == 1).Take(8).Select(x => Quantity.FormatFrequency(x.SpacingHz));
                o.WriteLine($"  candidate spacings: {string.Join(", ", shown)}{(f.Candidates.Count(x => x.Divisor == 1) > 8 ? ", …" : "")} (all in modes.json)");
                o.WriteLine($"  {f.SecondCavity}");
            }
        }

        if (a.SecondFamily is { } sf)
            o.WriteLine($"  second family: {sf.MemberCount} lines offset {sf.OffsetFraction.ToString("0.000", ci)} of the spacing, strongest {sf.StrongestRelativeDb.ToString("0.0", ci)} dB");

        o.WriteLine($"  lines within {a.Count.WithinDb.ToString("0.#", ci)} dB of the strongest: {a.Count.Total}" +
                    (a.Count.Total != a.Count.MainComb ? $" ({a.Count.MainComb} on the comb)" : ""));
        var smsr = a.Smsr.Kind switch
        {
            SmsrKind.Measured => $"{DbWithSigma(a.Smsr.ValueDb!.Value, a.Smsr.SigmaDb)} dB",
            SmsrKind.LowerBound => $"≥ {a.Smsr.ValueDb!.Value.ToString("0.0", ci)} dB (no side mode above the detection limit)",
            _ => "cannot be bounded (no side mode seen, no detection limit)",
        };
        o.WriteLine($"  SMSR {smsr}");
        var e = a.Envelope;
        if (e.Fitted)
        {
            var centre = e.CentreHz is { } ch
                ? $"centre {WithSigma(ch, e.CentreSigmaHz, Quantity.FormatFrequency)} from the anchor"
                : $"centre at k = {e.CentreK!.Value.ToString("0.00", ci)}";
            var width = e.FwhmHz is { } w
                ? $"FWHM {WithSigma(w, e.FwhmSigmaHz, Quantity.FormatFrequency)}"
                : $"FWHM {e.FwhmModes!.Value.ToString("0.0", ci)} modes";
            o.WriteLine($"  envelope: {centre}, {width}");
        }
        else
        {
            o.WriteLine($"  envelope: not fitted ({e.Message})");
        }

        foreach (var n in a.Notes) o.WriteLine($"  note: {n}");
    }

    /// <summary>"31.2 ± 0.4": rounded to the second significant digit of the sigma (one decimal without one).</summary>
    private static string DbWithSigma(double value, double? sigma)
    {
        var ci = CultureInfo.InvariantCulture;
        if (sigma is not { } s || !(s > 0) || !double.IsFinite(s)) return value.ToString("0.0", ci);
        var decimals = (int)Math.Clamp(1 - Math.Floor(Math.Log10(s)), 0, 6);
        return $"{value.ToString("F" + decimals, ci)} ± {s.ToString("F" + decimals, ci)}";
    }

    /// <summary>
    /// A value with its sigma in one unit chosen from the value ("52.04705 ± 0.00068 GHz"), rounded to the second
    /// significant digit of the sigma; without a sigma, seven significant digits.
    /// </summary>
    private static string WithSigma(double value, double? sigma, Func<double, int, string> format)
    {
        if (sigma is not { } s || !(s > 0) || !double.IsFinite(s)) return format(value, 7);
        var text = format(value, 4);
        var unit = text[(text.LastIndexOf(' ') + 1)..];
        var factor = UnitFactor(unit);
        var decimals = (int)Math.Clamp(1 - Math.Floor(Math.Log10(s / factor)), 0, 12);
        var ci = CultureInfo.InvariantCulture;
        return $"{(value / factor).ToString("F" + decimals, ci)} ± {(s / factor).ToString("F" + decimals, ci)} {unit}";
    }

    private static double UnitFactor(string unit) => unit switch
    {
        "THz" => 1e12,
        "GHz" => 1e9,
        "MHz" => 1e6,
        "kHz" => 1e3,
        "mm" => 1e-3,
        "um" => 1e-6,
        "nm" => 1e-9,
        _ => 1,
    };
}
