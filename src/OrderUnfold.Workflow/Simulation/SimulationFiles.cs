using System.Globalization;
using System.Text;
using OrderUnfold.Io;

namespace OrderUnfold.Simulation;

/// <summary>What <see cref="SimulationFiles.Write"/> produced.</summary>
public sealed record SimulationOutput(Setup Setup, IReadOnlyList<string> Files, string SetupPath);

/// <summary>Simulated scenarios as files: sweep records (CSV), a setup file and the truth table. The simulation itself
/// (<see cref="Simulator"/>, <see cref="Scenarios"/>) is pure computation in the methods layer.</summary>
public static class SimulationFiles
{
    /// <summary>Writes each cavity's source record (and calibration record) as CSV plus a setup file.</summary>
    public static SimulationOutput Write(SimulationSpec spec, string directory, SolveOptions? solve = null)
    {
        Directory.CreateDirectory(directory);
        var rng = new Random(spec.Seed);
        var files = new List<string>();
        var instruments = new List<InstrumentSpec>();
        var sweeps = new List<SweepSpec>();
        var cals = new List<CalibrationSpec>();
        foreach (var cav in spec.Cavities)
        {
            var inst = cav.Instrument;
            // A datasheet error states another FSR (then written as an FSR, not a length) or finesse than simulated.
            var fsrError = spec.StatedFsrFactor != 1.0;
            instruments.Add(new InstrumentSpec
            {
                Name = inst.Name, Geometry = inst.Geometry,
                LengthM = fsrError ? null : inst.LengthM,
                FsrHz = fsrError ? inst.FsrHz * spec.StatedFsrFactor : inst.LengthM is null ? inst.FsrHz : null,
                RefractiveIndex = inst.RefractiveIndex,
                Finesse = spec.StatedFinesseFactor != 1.0 ? Math.Max(1, inst.Finesse * spec.StatedFinesseFactor) : inst.Finesse,
            });
            var src = Simulator.Trace(spec, cav, false, rng);
            var srcOptions = WriteRecord(directory, $"{inst.Name}_source", spec, cav, src, "source", files);
            sweeps.Add(new SweepSpec { Instrument = inst.Name, File = srcOptions });
            if (spec.CalibrationSweeps)
            {
                var cal = Simulator.Trace(spec, cav, true, rng);
                var calOptions = WriteRecord(directory, $"{inst.Name}_calibration", spec, cav, cal, "calibration laser", files);
                cals.Add(new CalibrationSpec { Instrument = inst.Name, File = calOptions, WavelengthM = spec.CalibrationWavelengthM });
            }
        }

        var setupPath = Path.Combine(directory, "setup.toml");
        var setup = new Setup
        {
            Path = setupPath,
            Instruments = instruments,
            Sweeps = sweeps,
            Calibrations = cals,
            Solve = (solve ?? new SolveOptions()) with { SourceWavelengthM = spec.SourceWavelengthM ?? solve?.SourceWavelengthM },
        };
        var note = new StringBuilder("# " + spec.Label + "\n");
        if (spec.StatedFsrFactor != 1.0 || spec.StatedFinesseFactor != 1.0)
        {
            var c = CultureInfo.InvariantCulture;
            note.Append("# datasheet errors on purpose: the simulated cavities differ from what this setup states\n");
            foreach (var cav in spec.Cavities)
                note.Append($"#   {cav.Instrument.Name}: simulated FSR {cav.Instrument.FsrHz.ToString("R", c)} Hz, finesse {cav.Instrument.Finesse.ToString("R", c)}\n");
        }

        AtomicFile.WriteAllText(setupPath, note + SetupWriter.Write(setup, directory));
        files.Add(setupPath);
        return new SimulationOutput(setup, files, setupPath);
    }

    /// <summary>Writes one record, as one file or (with <see cref="SimulationSpec.SplitChannels"/>) as a signal file and a
    /// ramp file; adds the paths to <paramref name="files"/> and returns how the setup reads it.</summary>
    private static SweepFileOptions WriteRecord(string directory, string stem, SimulationSpec spec, SimulatedCavity cav, SimulatedTrace trace, string what, List<string> files)
    {
        if (!spec.SplitChannels)
        {
            var path = Path.Combine(directory, stem + ".csv");
            WriteCsv(path, spec, cav, trace, what);
            files.Add(path);
            return new SweepFileOptions
            {
                Path = Path.GetFullPath(path),
                XColumn = "time_s",
                YColumn = "signal_V",
                RampColumn = spec.Triangle ? "ramp_V" : null,
                Scan = ScanCoordinate.Time,
            };
        }

        var signalPath = Path.Combine(directory, stem + "_ch1.csv");
        var rampPath = Path.Combine(directory, stem + "_ch2.csv");
        WriteChannel(signalPath, spec, cav, trace.TimeS, trace.Signal, what, "CH1 detector", "signal_V", "G6");
        WriteChannel(rampPath, spec, cav, trace.TimeS, trace.RampV, what, "CH2 ramp monitor", "ramp_V", "F4");
        files.Add(signalPath);
        files.Add(rampPath);
        return new SweepFileOptions
        {
            Path = Path.GetFullPath(signalPath),
            XColumn = "time_s",
            YColumn = "signal_V",
            RampFile = spec.Triangle ? Path.GetFullPath(rampPath) : null,
            RampTimeColumn = spec.Triangle ? "time_s" : null,
            RampValueColumn = spec.Triangle ? "ramp_V" : null,
            Scan = ScanCoordinate.Time,
        };
    }

    /// <summary>One channel in a file of its own: a header block (what, channel, record length, interval), then time and value.</summary>
    private static void WriteChannel(string path, SimulationSpec spec, SimulatedCavity cav, double[] time, double[] values, string what, string channel, string column, string format)
    {
        var sb = new StringBuilder();
        var c = CultureInfo.InvariantCulture;
        sb.Append($"# {spec.Label}\r\n");
        sb.Append($"# cavity {cav.Instrument.Name}: {what}; seed {spec.Seed}\r\n");
        sb.Append($"Channel,{channel}\r\n");
        sb.Append($"Record length,{values.Length}\r\n");
        sb.Append($"Sample interval,{spec.SampleIntervalS.ToString("R", c)}\r\n");
        sb.Append($"time_s,{column}\r\n");
        for (var i = 0; i < values.Length; i++)
            sb.Append(time[i].ToString("G9", c)).Append(',').Append(values[i].ToString(format, c)).Append("\r\n");
        AtomicFile.WriteAllText(path, sb.ToString());
    }

    private static void WriteCsv(string path, SimulationSpec spec, SimulatedCavity cav, SimulatedTrace trace, string what)
    {
        var sb = new StringBuilder();
        var c = CultureInfo.InvariantCulture;
        sb.AppendLine($"# {spec.Label}");
        sb.AppendLine($"# cavity {cav.Instrument.Name}: {what}; seed {spec.Seed}");
        sb.AppendLine($"Record length,{trace.Signal.Length}");
        sb.AppendLine($"Sample interval,{spec.SampleIntervalS.ToString("R", c)}");
        sb.AppendLine("time_s,ramp_V,signal_V");
        for (var i = 0; i < trace.Signal.Length; i++)
            sb.Append(trace.TimeS[i].ToString("G9", c)).Append(',')
              .Append(trace.RampV[i].ToString("F4", c)).Append(',')
              .Append(trace.Signal[i].ToString("G6", c)).Append('\n');
        AtomicFile.WriteAllText(path, sb.ToString());
    }

    /// <summary>truth.csv: the simulated lines relative to the strongest one, intensity relative to it.</summary>
    public static string TruthCsv(SimulationSpec spec)
    {
        var strongest = spec.Lines.MaxBy(l => l.Intensity)!;
        var sb = new StringBuilder($"# {spec.Label}\nfrequency_hz,intensity,width_hz\n");
        foreach (var l in spec.Lines.OrderBy(l => l.FrequencyHz))
            sb.Append((l.FrequencyHz - strongest.FrequencyHz).ToString("R", CultureInfo.InvariantCulture)).Append(',')
              .Append((l.Intensity / strongest.Intensity).ToString("R", CultureInfo.InvariantCulture)).Append(',')
              .Append(l.WidthHz.ToString("R", CultureInfo.InvariantCulture)).Append('\n');
        return sb.ToString();
    }

    /// <summary>Reads a truth.csv written by <see cref="TruthCsv"/>.</summary>
    public static IReadOnlyList<SimulatedLine> ReadTruth(string path)
    {
        var lines = new List<SimulatedLine>();
        var n = 0;
        foreach (var raw in File.ReadLines(path))
        {
            n++;
            if (raw.StartsWith('#') || raw.StartsWith("frequency_hz", StringComparison.Ordinal) || raw.Trim().Length == 0) continue;
            var f = raw.Split(',');
            if (f.Length < 2 || !double.TryParse(f[0], NumberStyles.Float, CultureInfo.InvariantCulture, out var hz) ||
                !double.TryParse(f[1], NumberStyles.Float, CultureInfo.InvariantCulture, out var inten))
                throw new InputException("expected 'frequency_hz,intensity[,width_hz]'", path, n);
            lines.Add(new SimulatedLine(hz, inten));
        }

        return lines;
    }

    /// <summary>Writes a scenario's files (sweeps, calibrations, setup.toml, truth.csv) into a folder.</summary>
    public static SimulationOutput WriteScenario(SimulationSpec spec, string directory, SolveOptions? solve = null)
    {
        var output = Write(spec, directory, solve);
        var truth = Path.Combine(directory, "truth.csv");
        AtomicFile.WriteAllText(truth, TruthCsv(spec));
        return output with { Files = output.Files.Append(truth).ToList() };
    }
}
