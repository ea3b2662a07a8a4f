namespace OrderUnfold.Io;

/// <summary>The commented starting point that <c>orderunfold init</c> writes (see docs/setup.md).</summary>
internal static class SetupTemplate
{
    /// <summary>
    /// Invented example: a short solid-state laser near 1064.5 nm running on a few longitudinal modes,
    /// watched by two scanning cavities whose FSRs differ (a Vernier pair). The template must stay a
    /// valid setup: a test writes it beside two data files and reads it back.
    /// </summary>
    public const string Text = """
        # OrderUnfold setup file (TOML). Every key is described in docs/setup.md.
        #
        # Example scenario: a short Nd:YVO4 laser near 1064.5 nm oscillating on a handful of longitudinal
        # modes, observed with two scanning cavities of different free spectral range. Each cavity alone
        # folds the modes onto each other; read together, their sweeps pin down one spectrum.
        #
        # Quantities with a dimension are strings with a unit: "20 mm", "1.153 GHz", "5 us", "1064.5 nm".
        # Accepted units: Hz kHz MHz GHz THz | m cm mm um nm pm | s ms us ns ps.
        # Plain numbers (finesse, reflectance, weights) have no unit.

        # ---------------------------------------------------------------------------------------------
        # Cavities. One [[instrument]] table per cavity; sweeps refer to them by name.
        # ---------------------------------------------------------------------------------------------

        [[instrument]]
        name = "coarse"            # short unique name, used by [[sweep]] and [[calibration]] below
        geometry = "planar"        # "planar" (FSR = c/2nL) or "confocal" (FSR = c/4nL, not mode-matched)
        length = "20 mm"           # mirror spacing; give either length or fsr, not both
        refractive_index = 1.0     # index of the medium between the mirrors (air: 1.0)
        finesse = 90               # FSR / linewidth; give either finesse or reflectance, not both
        mirror_loss = 0.0          # absorption + scatter per mirror, as a fraction (affects peak height only)
        fix_finesse = false        # true: keep this finesse even if a calibration sweep measures another
        # mirror_radius = "50 mm"    # radius of curvature of the mirrors (needs length): predicts the transverse families
        # mirror_radius_2 = "52 mm"  # second mirror's radius when it differs from the first

        [[instrument]]
        name = "fine"
        geometry = "confocal"
        fsr = "1.153 GHz"          # free spectral range, when it is known better than the spacing
        refractive_index = 1.0
        reflectance = 0.995        # mirror reflectance R, 0 < R < 1; finesse = pi*sqrt(R)/(1-R)
        mirror_loss = 0.0005
        fix_finesse = false

        # ---------------------------------------------------------------------------------------------
        # Measured sweeps of the source. One [[sweep]] table per file; a file holding a triangle ramp
        # gives one sweep per ramp direction.
        # ---------------------------------------------------------------------------------------------

        [[sweep]]
        instrument = "coarse"      # name of the [[instrument]] that took this file
        file = "coarse_scan.csv"   # path relative to this setup file's folder
        x_column = "ramp"          # scan coordinate: header name, or column number from 1 (default: first column)
        y_column = "signal"        # detector signal: header name or column number (default: last column)
        scan = "ramp"              # what x is: "time" (seconds) or "ramp" (monitor volts)
        delimiter = "auto"         # field separator: "auto", ",", ";" or "tab"
        decimal = "auto"           # decimal mark: "auto", "point" or "comma"
        header = "auto"            # first row is a header: "auto", true or false
        directions = "both"        # ramp halves to use: "both", "up" or "down"

        [[sweep]]
        instrument = "fine"
        file = "fine_scan.csv"
        # No x_column: time is rebuilt from the sample interval (sample number x interval).
        sample_interval = "5 us"   # time between samples; only with scan = "time"
        y_column = 3
        ramp_column = 2            # recorded ramp voltage, used to split up and down ramps when x is time
        # Scopes that save each channel to its own file: name the ramp's file instead of ramp_column;
        # its samples are matched to the signal's by time.
        # ramp_file = "fine_ramp.csv"    # file holding the ramp monitor (time and voltage columns)
        # ramp_time_column = 1           # its time column (default: first column)
        # ramp_value_column = 2          # its ramp voltage column (default: last column)
        scan = "time"
        delimiter = ","
        decimal = "point"
        header = true
        directions = "up"

        # ---------------------------------------------------------------------------------------------
        # Calibration sweeps (optional, at most one per instrument): a single-frequency laser sent
        # through the same cavity with the same ramp. It fixes how the scan coordinate maps to
        # frequency (and the finesse, unless fix_finesse is true). Remove the leading '#' to use it;
        # it takes the same reading keys as [[sweep]].
        # ---------------------------------------------------------------------------------------------

        # [[calibration]]
        # instrument = "fine"
        # file = "fine_reference.csv"
        # x_column = 1
        # y_column = 3
        # scan = "time"
        # wavelength = "1064 nm"   # wavelength of the calibration laser, if it differs from the source
        # axis_degree = "auto"     # polynomial degree of the scan axis, 1 to 7, or "auto"

        # ---------------------------------------------------------------------------------------------
        # Inversion options (the whole table is optional; these are sensible starting values).
        # ---------------------------------------------------------------------------------------------

        [solve]
        window = ["-6 GHz", "6 GHz"]      # frequency range to solve, relative to the strongest line
        grid_step = "0.5 MHz"             # spacing of the frequency grid (default: a quarter linewidth)
        sparsity = 3.0                    # weight that favours few lines, in units of the noise level
        smoothness = 0.0                  # weight that favours smooth spectra; 0 for line spectra
        anchor_frequency = "281.627 THz"  # absolute frequency of the strongest line, to report absolute values
        min_snr = 5.0                     # lines with a lower signal-to-noise ratio are not reported
        source_wavelength = "1064.5 nm"   # source wavelength; needed when a calibration uses another laser
        refine = true                     # refine lines off the grid: uncertainties and order confidence
        fit_widths = false                # also fit an intrinsic (Lorentzian) width per line
        bootstrap = 0                     # residual-bootstrap replicates for frequency errors (0: none)
        doubtful_delta_chi2 = 25.0        # a line whose best alias fits within this Δχ² is called doubtful
        self_calibrate = "auto"           # axes from the source's own repeats one FSR apart: "auto", "always" or "never"
        # known_interval = "2.5 GHz"      # lines this far apart (e.g. phase-modulator sidebands) fix the absolute FSR
        refine_fsr = false                # refine the FSR ratio of the cavities from the lines' Vernier pattern
        solver = "auto"                   # NNLS solver: "auto", "active-set" (line spectra) or "dense" (broadband)
        max_memory_gb = 4.0               # refuse (before solving) an unfold estimated to need more memory than this

        """;
}
