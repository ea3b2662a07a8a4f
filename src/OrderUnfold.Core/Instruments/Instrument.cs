using OrderUnfold.Units;

namespace OrderUnfold.Instruments;

/// <summary>Mirror arrangement of a scanning cavity.</summary>
public enum CavityGeometry
{
    /// <summary>Plane-parallel (or mode-matched) cavity: FSR = c / (2 n L).</summary>
    Planar,

    /// <summary>Confocal cavity, not mode-matched: FSR = c / (4 n L).</summary>
    Confocal,
}

/// <summary>
/// One scanning cavity as the inversion sees it: free spectral range and finesse (the instrument
/// profile is the Airy function). Immutable; SI units (Hz, m).
/// </summary>
public sealed record Instrument
{
    /// <summary>An instrument; throws <see cref="InputException"/> for a missing name, a non-positive FSR, a finesse below 1 or a refractive index below 1.</summary>
    public Instrument(string name, double fsrHz, double finesse, CavityGeometry geometry = CavityGeometry.Planar,
        double? lengthM = null, double refractiveIndex = 1.0, double peakTransmission = 1.0)
    {
        if (string.IsNullOrWhiteSpace(name)) throw new InputException("an instrument needs a name");
        if (!(fsrHz > 0) || !double.IsFinite(fsrHz)) throw new InputException($"instrument '{name}': FSR must be positive but got {fsrHz} Hz");
        if (!(finesse >= 1) || !double.IsFinite(finesse)) throw new InputException($"instrument '{name}': finesse must be at least 1 but got {finesse}");
        if (!(refractiveIndex >= 1)) throw new InputException($"instrument '{name}': refractive index must be at least 1 but got {refractiveIndex}");
        Name = name;
        FsrHz = fsrHz;
        Finesse = finesse;
        Geometry = geometry;
        LengthM = lengthM;
        RefractiveIndex = refractiveIndex;
        PeakTransmission = peakTransmission;
    }

    /// <summary>Name the setup and the outputs use.</summary>
    public string Name { get; init; }

    /// <summary>Free spectral range in Hz.</summary>
    public double FsrHz { get; init; }

    /// <summary>Finesse 𝓕 (FSR / linewidth).</summary>
    public double Finesse { get; init; }

    /// <summary>Mirror geometry (sets the FSR law).</summary>
    public CavityGeometry Geometry { get; init; }

    /// <summary>Mirror spacing in m when the FSR came from a length; null when the FSR was given directly.</summary>
    public double? LengthM { get; init; }

    /// <summary>Refractive index between the mirrors.</summary>
    public double RefractiveIndex { get; init; }

    /// <summary>Tmax; the inversion absorbs it into the per-sweep gain.</summary>
    public double PeakTransmission { get; init; }

    /// <summary>Mirror radii of curvature (m; ∞ for a plane mirror) when stated: starting points for the transverse families.</summary>
    public (double R1, double R2)? MirrorRadiiM { get; init; }

    /// <summary>Transverse families that belong to the instrument response (beside TEM00); empty when none were found.</summary>
    public IReadOnlyList<CavityModeFamily> Families { get; init; } = [];

    /// <summary>True once the finesse was measured from the data; false while it is the stated value (then the
    /// refinement widens its uncertainties).</summary>
    public bool FinesseMeasured { get; init; }

    /// <summary>Linewidth (FWHM) FSR/𝓕 in Hz.</summary>
    public double LinewidthHz => FsrHz / Finesse;

    /// <summary>FSR of a cavity of mirror spacing L and index n: c/(2nL) planar, c/(4nL) confocal (not mode-matched).</summary>
    public static double FsrFromLength(double lengthM, CavityGeometry geometry, double refractiveIndex = 1.0)
    {
        if (!(lengthM > 0) || !double.IsFinite(lengthM)) throw new InputException($"cavity length must be positive but got {lengthM} m");
        if (!(refractiveIndex >= 1)) throw new InputException($"refractive index must be at least 1 but got {refractiveIndex}");
        var factor = geometry == CavityGeometry.Planar ? 2.0 : 4.0;
        return PhysicalConstants.SpeedOfLight / (factor * refractiveIndex * lengthM);
    }

    /// <summary>An instrument described by its mirror spacing.</summary>
    public static Instrument FromLength(string name, double lengthM, CavityGeometry geometry, double finesse, double refractiveIndex = 1.0) =>
        new(name, FsrFromLength(lengthM, geometry, refractiveIndex), finesse, geometry, lengthM, refractiveIndex);

    /// <summary>Transmission relative to Tmax at a detuning from a peak.</summary>
    public double Transmission(double detuningHz) => Airy.Transmission(detuningHz, FsrHz, Finesse);

    /// <summary>
    /// The instrument response to one line at detuning δ = ν − φ − f(x): the TEM00 Airy peak plus each transverse
    /// family's Airy peak, of its relative height, at δ = o_N·FSR.
    /// </summary>
    public double Response(double detuningHz)
    {
        var t = Airy.Transmission(detuningHz, FsrHz, Finesse);
        foreach (var f in Families) t += f.RelativeHeight * Airy.Transmission(detuningHz - f.GouyOffsetFsr * FsrHz, FsrHz, Finesse);
        return t;
    }

    /// <summary>Name, FSR, finesse and transverse families in one line.</summary>
    public override string ToString() => $"{Name}: FSR {Quantity.FormatFrequency(FsrHz)}, finesse {Finesse:F0}" +
        (Families.Count == 0 ? "" : "; transverse families " + string.Join(", ", Families.Select(f => $"N={f.N} {f.ApparentOffsetFsr:F4} FSR after TEM00 ({100 * f.RelativeHeight:F0} %)")));
}
