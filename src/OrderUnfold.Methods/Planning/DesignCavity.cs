using OrderUnfold.Instruments;
using OrderUnfold.Units;

namespace OrderUnfold.Planning;

/// <summary>One cavity of a design, with the length tolerance it will be made to (0 for a cavity that exists).</summary>
/// <param name="Instrument">The cavity at its nominal length.</param>
/// <param name="LengthToleranceM">Half-width of the length band, m: the real length lies within ±this of the nominal one.</param>
/// <param name="Label">Catalogue label or part name, when there is one.</param>
public sealed record DesignCavity(Instrument Instrument, double LengthToleranceM = 0, string? Label = null)
{
    /// <summary>The tolerance as a fraction of the length (0 when there is none).</summary>
    public double RelativeTolerance => LengthToleranceM > 0 && Instrument.LengthM is double l ? LengthToleranceM / l : 0;

    /// <summary>The same cavity with its spacing changed by the factor (1 + <paramref name="relativeChange"/>);
    /// geometry, finesse and index stay.</summary>
    public Instrument AtRelativeLength(double relativeChange)
    {
        if (relativeChange == 0) return Instrument;
        var l = Instrument.LengthM ?? throw new InvalidOperationException("no length");
        return Instrument.FromLength(Instrument.Name, l * (1 + relativeChange), Instrument.Geometry, Instrument.Finesse, Instrument.RefractiveIndex);
    }

    /// <summary>Throws <see cref="InputException"/> when the tolerance cannot apply.</summary>
    public void Validate()
    {
        if (!(LengthToleranceM >= 0) || !double.IsFinite(LengthToleranceM))
            throw new InputException($"cavity '{Instrument.Name}': the length tolerance must be zero or positive but got {LengthToleranceM} m");
        if (LengthToleranceM > 0 && Instrument.LengthM is not double len)
            throw new InputException($"cavity '{Instrument.Name}' is given by its FSR, not a length, so a length tolerance cannot apply to it");
        if (LengthToleranceM > 0 && LengthToleranceM >= 0.5 * Instrument.LengthM!.Value)
            throw new InputException($"cavity '{Instrument.Name}': the length tolerance {Quantity.FormatLength(LengthToleranceM)} is not small compared to the length {Quantity.FormatLength(Instrument.LengthM!.Value)}");
    }

    /// <summary>"planar 93.70 mm ±0.05 mm (FSR 1.600 GHz)".</summary>
    public string Describe()
    {
        var g = Instrument.Geometry.ToString().ToLowerInvariant();
        var len = Instrument.LengthM is double l ? Quantity.FormatLength(l) : null;
        var tol = LengthToleranceM > 0 ? " ±" + Quantity.FormatLength(LengthToleranceM) : "";
        var fsr = Quantity.FormatFrequency(Instrument.FsrHz);
        return len is null ? $"{g}, FSR {fsr}" : $"{g} {len}{tol} (FSR {fsr})";
    }
}

/// <summary>How candidate cavities are built: the same geometry, finesse, index and tolerance for every length.</summary>
/// <param name="Geometry">Mirror arrangement.</param>
/// <param name="Finesse">Finesse of the candidate (usually that of the mirrors at hand).</param>
/// <param name="LengthToleranceM">Length tolerance the part will be made to, m.</param>
/// <param name="RefractiveIndex">Index of the spacer gap (1 for air or vacuum).</param>
public sealed record CavityFamily(CavityGeometry Geometry, double Finesse, double LengthToleranceM = 0, double RefractiveIndex = 1.0)
{
    /// <summary>The candidate of one length as a design cavity named <paramref name="name"/>.</summary>
    public DesignCavity Make(string name, CandidateLength candidate) =>
        new(Instrument.FromLength(name, candidate.LengthM, Geometry, Finesse, RefractiveIndex), LengthToleranceM, candidate.Label);
}
