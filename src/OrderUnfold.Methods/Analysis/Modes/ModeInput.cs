namespace OrderUnfold.Analysis.Modes;

/// <summary>
/// One line of the measured spectrum as the mode analysis sees it. Frequencies are in Hz relative to the
/// anchor of the line list (or folded positions when the orders were not resolved); intensities are in any
/// linear power unit shared by all lines.
/// </summary>
/// <param name="FrequencyHz">Line position in Hz.</param>
/// <param name="FrequencySigmaHz">Standard uncertainty of the position in Hz, when known (0 counts as unknown).</param>
/// <param name="Intensity">Linear power of the line (same unit for all lines).</param>
/// <param name="IntensitySigma">Standard uncertainty of the intensity, when known.</param>
/// <param name="Snr">Signal-to-noise ratio of the line, when known (carried along, not used by the fit).</param>
public sealed record ModeInputLine(double FrequencyHz, double? FrequencySigmaHz, double Intensity, double? IntensitySigma, double? Snr);

/// <summary>
/// Everything the mode analysis needs from a measurement: the line list and how far it can be trusted.
/// </summary>
/// <param name="Lines">The lines, in any order.</param>
/// <param name="DetectionLimit">Smallest intensity, relative to the strongest line, that would have been
/// detected; null when unknown. Needed to bound the SMSR when no side mode is seen.</param>
/// <param name="OrdersResolved">True when the line positions are true frequency differences (several
/// cavities, unfolded); false when only one FSR was measured and positions are known modulo
/// <paramref name="FoldingFsrHz"/>.</param>
/// <param name="FoldingFsrHz">FSR of the single instrument when the orders are not resolved.</param>
/// <param name="AbsoluteAnchorHz">Absolute frequency of the anchor (position 0), when known.</param>
public sealed record ModeInput(
    IReadOnlyList<ModeInputLine> Lines,
    double? DetectionLimit,
    bool OrdersResolved,
    double? FoldingFsrHz,
    double? AbsoluteAnchorHz)
{
    /// <summary>
    /// Checks the input and throws <see cref="InputException"/> naming the first problem: no lines,
    /// non-finite values, negative uncertainties, a detection limit outside (0, 1], or a folded list
    /// without a positive FSR.
    /// </summary>
    public void Validate()
    {
        if (Lines is null || Lines.Count == 0)
            throw new InputException("the line list is empty: there is nothing to analyse");
        for (var i = 0; i < Lines.Count; i++)
        {
            var l = Lines[i] ?? throw new InputException($"line {i + 1} of the line list is missing");
            var n = i + 1;
            if (!double.IsFinite(l.FrequencyHz))
                throw new InputException($"line {n}: the frequency must be a finite number but got {l.FrequencyHz}");
            if (!double.IsFinite(l.Intensity))
                throw new InputException($"line {n}: the intensity must be a finite number but got {l.Intensity}");
            CheckSigma(l.FrequencySigmaHz, n, "frequency sigma");
            CheckSigma(l.IntensitySigma, n, "intensity sigma");
            if (l.Snr is { } snr && double.IsNaN(snr))
                throw new InputException($"line {n}: the SNR must be a number but got NaN");
        }

        if (!Lines.Any(l => l.Intensity > 0))
            throw new InputException("no line has a positive intensity: there is no mode to analyse");
        if (DetectionLimit is { } d && !(d > 0 && d <= 1))
            throw new InputException($"the detection limit is a relative intensity and must lie in (0, 1] but got {d}");
        if (!OrdersResolved && FoldingFsrHz is not { } f)
            throw new InputException("the orders are not resolved but no folding FSR is given: the positions cannot be read");
        if (!OrdersResolved && !(FoldingFsrHz > 0 && double.IsFinite(FoldingFsrHz.Value)))
            throw new InputException($"the folding FSR must be a positive frequency but got {FoldingFsrHz} Hz");
        if (AbsoluteAnchorHz is { } a && !double.IsFinite(a))
            throw new InputException($"the anchor frequency must be finite but got {a} Hz");
    }

    private static void CheckSigma(double? sigma, int line, string what)
    {
        if (sigma is { } s && !(s >= 0 && double.IsFinite(s)))
            throw new InputException($"line {line}: the {what} must be a finite number ≥ 0 but got {s}");
    }
}
