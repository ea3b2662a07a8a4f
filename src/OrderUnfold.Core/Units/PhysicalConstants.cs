namespace OrderUnfold.Units;

/// <summary>Constants used by the physics, with their source.</summary>
public static class PhysicalConstants
{
    /// <summary>Speed of light in vacuum, m/s: exact by the SI definition of the metre (BIPM SI Brochure, 9th ed., 2019).</summary>
    public const double SpeedOfLight = 299_792_458.0;
}
