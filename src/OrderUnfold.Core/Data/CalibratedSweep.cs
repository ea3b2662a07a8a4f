using OrderUnfold.Instruments;
using OrderUnfold.Numerics;

namespace OrderUnfold.Data;

/// <summary>One calibrated sweep as the inversion needs it.</summary>
/// <param name="Name">Display name.</param>
/// <param name="Instrument">Cavity it was taken with.</param>
/// <param name="ScanHz">Calibrated scan frequency shift f(xᵢ) of each sample.</param>
/// <param name="Signal">Detector signal yᵢ.</param>
/// <param name="NoiseSigma">Noise σ of the signal (same units).</param>
public sealed record CalibratedSweep(string Name, Instrument Instrument, double[] ScanHz, double[] Signal, double NoiseSigma)
{
    /// <summary>How uncertain the scan axis is (null: taken as exact).</summary>
    public AxisUncertainty? AxisUncertainty { get; init; }

    /// <summary>How <see cref="NoiseSigma"/> was estimated (null when it was given, e.g. by a simulation).</summary>
    public NoiseEstimate? Noise { get; init; }

    /// <summary>For each sample, the estimated axis uncertainty where the axis is extrapolated beyond its calibration
    /// points (0 inside), Hz; null when no sample is extrapolated.</summary>
    public double[]? ExtrapolationSigmaHz { get; init; }
}

/// <summary>
/// The uncertainty of a sweep's calibrated scan axis: the axis polynomial, the covariance of its shape coefficients
/// (row-major d × d, Hz², see <see cref="AxisPolynomial.ShapeCovariance"/>) and each sample's scan
/// coordinate x. Sweeps calibrated by one axis share its errors: they have the same <paramref name="Group"/>.
/// </summary>
public sealed record AxisUncertainty(object Group, AxisPolynomial Polynomial, double[] ShapeCovariance, double[] X)
{
    /// <summary>The same for an axis scaled by <paramref name="factor"/> (an FSR refinement).</summary>
    public AxisUncertainty Scaled(double factor) =>
        this with { Polynomial = Polynomial.Scaled(factor), ShapeCovariance = ShapeCovariance.Select(v => v * factor * factor).ToArray() };
}
