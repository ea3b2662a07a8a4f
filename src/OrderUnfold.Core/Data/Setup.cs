using OrderUnfold.Instruments;

namespace OrderUnfold.Data;

/// <summary>One instrument as described in a setup file (before calibration refines it).</summary>
public sealed record InstrumentSpec
{
    /// <summary>Name the sweeps and calibrations refer to.</summary>
    public required string Name { get; init; }
    /// <summary>Mirror geometry (sets the FSR law, c/2nL or c/4nL).</summary>
    public CavityGeometry Geometry { get; init; } = CavityGeometry.Planar;

    /// <summary>Mirror spacing in m, or null when <see cref="FsrHz"/> is given.</summary>
    public double? LengthM { get; init; }

    /// <summary>FSR in Hz, or null when it follows from the length.</summary>
    public double? FsrHz { get; init; }

    /// <summary>Refractive index of the medium between the mirrors (1 for air or vacuum, as an approximation).</summary>
    public double RefractiveIndex { get; init; } = 1.0;

    /// <summary>Finesse given directly, or null.</summary>
    public double? Finesse { get; init; }

    /// <summary>Mirror reflectance R (finesse π√R/(1−R)) when the finesse is not given.</summary>
    public double? Reflectance { get; init; }

    /// <summary>Mirror loss A per mirror (for peak transmission), default 0.</summary>
    public double MirrorLoss { get; init; }

    /// <summary>True: keep the stated finesse even when a calibration sweep measures another.</summary>
    public bool FixFinesse { get; init; }

    /// <summary>Radius of curvature of the first mirror (of both when <see cref="MirrorRadius2M"/> is null), m; null when not stated.</summary>
    public double? MirrorRadiusM { get; init; }

    /// <summary>Radius of curvature of the second mirror, m, when it differs from the first.</summary>
    public double? MirrorRadius2M { get; init; }

    /// <summary>1-based line of the [[instrument]] table in the setup file (for messages).</summary>
    public int Line { get; init; }

    /// <summary>The instrument with the stated values (finesse from reflectance when needed).</summary>
    public Instrument ToInstrument()
    {
        var fsr = FsrHz ?? Instrument.FsrFromLength(LengthM!.Value, Geometry, RefractiveIndex);
        var finesse = Finesse ?? Airy.ReflectanceFinesse(Reflectance!.Value);
        var peak = Reflectance is double r ? Airy.PeakTransmission(r, MirrorLoss) : 1.0;
        return new Instrument(Name, fsr, finesse, Geometry, LengthM, RefractiveIndex, peak)
        {
            MirrorRadiiM = MirrorRadiusM is double r1 ? (r1, MirrorRadius2M ?? r1) : null,
        };
    }
}

/// <summary>A measured sweep file and the instrument it was taken with.</summary>
public sealed record SweepSpec
{
    /// <summary>Name of the instrument the sweep was taken with.</summary>
    public required string Instrument { get; init; }
    /// <summary>The file and how to read it.</summary>
    public required SweepFileOptions File { get; init; }
    /// <summary>Line of the setup file that names this sweep (for messages); 0 when built in code.</summary>
    public int Line { get; init; }
}

/// <summary>A calibration sweep: a single-frequency laser through the same cavity and ramp.</summary>
public sealed record CalibrationSpec
{
    /// <summary>Name of the instrument the calibration sweep was taken with.</summary>
    public required string Instrument { get; init; }
    /// <summary>The file and how to read it.</summary>
    public required SweepFileOptions File { get; init; }

    /// <summary>Wavelength of the calibration laser in m, when it differs from the source (issue: reference laser).</summary>
    public double? WavelengthM { get; init; }

    /// <summary>Polynomial degree of the axis; null chooses it from the data.</summary>
    public int? AxisDegree { get; init; }

    /// <summary>Line of the setup file that names this calibration (for messages); 0 when built in code.</summary>
    public int Line { get; init; }
}

/// <summary>Options of the inversion ([solve] table).</summary>
public sealed record SolveOptions
{
    /// <summary>Frequency window relative to the anchor, Hz; null chooses it from the instruments.</summary>
    public double? WindowStartHz { get; init; }
    /// <summary>End of the frequency window relative to the anchor, Hz; null chooses it from the instruments.</summary>
    public double? WindowEndHz { get; init; }

    /// <summary>Grid step in Hz; null: a quarter of the narrowest linewidth.</summary>
    public double? GridStepHz { get; init; }

    /// <summary>L1 (sparsity) weight in units of noise σ × typical column norm. Default 3.</summary>
    public double Sparsity { get; init; } = 3.0;

    /// <summary>Smoothness weight (first-difference penalty μ‖Ds‖², relative to the median squared column norm); 0 = off.</summary>
    public double Smoothness { get; init; }

    /// <summary>Absolute frequency of the anchor line in Hz; null reports frequencies relative to the anchor.</summary>
    public double? AnchorFrequencyHz { get; init; }

    /// <summary>Lines whose signal-to-noise ratio is below this are not reported. Default 5.</summary>
    public double MinSnr { get; init; } = 5.0;

    /// <summary>Source wavelength in m (needed only to transfer a calibration made at another wavelength).</summary>
    public double? SourceWavelengthM { get; init; }

    /// <summary>Refine the lines off-grid against the raw sweeps (uncertainties, order confidence). Default true.</summary>
    public bool Refine { get; init; } = true;

    /// <summary>Fit an intrinsic Lorentzian width per line during refinement. Default false.</summary>
    public bool FitWidths { get; init; }

    /// <summary>Residual-bootstrap replicates for the frequency uncertainties (0: covariance only).</summary>
    public int Bootstrap { get; init; }

    /// <summary>Δχ² to the best alternative placement below which a line's order is doubtful. Default 25.</summary>
    public double DoubtfulDeltaChiSquare { get; init; } = 25;

    /// <summary>Which NNLS solver the unfold uses (see NnlsSolver in Inversion). Default auto.</summary>
    public SolverChoice Solver { get; init; } = SolverChoice.Auto;

    /// <summary>Most memory the unfold may need, GB (10⁹ bytes); the grid size limit follows from it. Default 4.</summary>
    public double MaxMemoryGb { get; init; } = 4.0;

    /// <summary>When to calibrate sweep axes from the source's own repeats one FSR apart. Default auto.</summary>
    public SelfCalibrationMode SelfCalibrate { get; init; } = SelfCalibrationMode.Auto;

    /// <summary>A frequency interval known to separate lines (RF sidebands of a phase modulator at this frequency,
    /// a known splitting), Hz; it calibrates the absolute FSR. Null: none.</summary>
    public double? KnownIntervalHz { get; init; }

    /// <summary>Refine the FSR ratios between instruments from the Vernier pattern of the lines. Default false.</summary>
    public bool RefineFsr { get; init; }
}

/// <summary>When sweep axes are calibrated from the source sweeps themselves (repeats one FSR apart).</summary>
public enum SelfCalibrationMode
{
    /// <summary>When an instrument and ramp direction has no calibration sweep, or one with three peaks or fewer
    /// (then jointly with those peaks).</summary>
    Auto,

    /// <summary>Every source sweep, jointly with the calibration sweep's peaks where there are any.</summary>
    Always,

    /// <summary>Never: every instrument and direction needs a calibration sweep.</summary>
    Never,
}

/// <summary>Everything a setup file says. Paths inside are already resolved relative to the setup file.</summary>
public sealed record Setup
{
    /// <summary>Path of the setup file itself (null when built in code).</summary>
    public string? Path { get; init; }
    /// <summary>The instruments ([[instrument]] tables).</summary>
    public required IReadOnlyList<InstrumentSpec> Instruments { get; init; }
    /// <summary>The source sweeps ([[sweep]] tables).</summary>
    public required IReadOnlyList<SweepSpec> Sweeps { get; init; }
    /// <summary>The calibration sweeps ([[calibration]] tables); may be empty.</summary>
    public IReadOnlyList<CalibrationSpec> Calibrations { get; init; } = [];
    /// <summary>The [solve] table.</summary>
    public SolveOptions Solve { get; init; } = new();
}

/// <summary>Which solver NnlsSolver (Inversion) uses: chosen automatically, or forced.</summary>
public enum SolverChoice
{
    /// <summary>Dense solver when the problem has a smoothness weight (support will be dense); otherwise the active set
    /// (see NnlsSolver.Solve for the optional handover by support).</summary>
    Auto,

    /// <summary>Always the active-set solver.</summary>
    ActiveSet,

    /// <summary>Always the dense solver.</summary>
    Dense,
}
