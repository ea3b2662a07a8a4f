using System.Text;
using OrderUnfold.Calibration;
using OrderUnfold.Io;
using OrderUnfold.Simulation;

namespace OrderUnfold.Pipeline.Batch;

/// <summary>What <see cref="DemoArchive.Write"/> produced.</summary>
/// <param name="ManifestPath">manifest.csv (id, setup, files, calibration, timestamp).</param>
/// <param name="CalibrationPath">calibration.json, made once from the calibration-laser sweep and reused by every item.</param>
/// <param name="Simulation">The simulated archive (items, truth).</param>
public sealed record DemoArchiveOutput(string ManifestPath, string CalibrationPath, ArchiveOutput Simulation);

/// <summary>
/// A ready-to-run archive for trying <c>batch</c>, <c>merge</c> and <c>track</c>: the simulated monitoring archive
/// of <see cref="ArchiveSimulator"/> (a few hundred single-sweep items, a few corrupt files, a mode hop), a calibration
/// file made from its calibration-laser sweep, and a manifest. Generated from a fixed seed, so nothing large is
/// kept in the repository.
/// </summary>
public static class DemoArchive
{
    /// <summary>Writes the archive into <paramref name="directory"/>; the same spec gives the same files. A cancelled
    /// <paramref name="cancellationToken"/> stops it (<see cref="OperationCanceledException"/>).</summary>
    public static DemoArchiveOutput Write(string directory, ArchiveSpec? spec = null, CancellationToken cancellationToken = default)
    {
        spec ??= new ArchiveSpec();
        var root = Path.GetFullPath(directory);
        var sim = ArchiveSimulator.Write(spec, root, cancellationToken);
        var set = UnfoldPipeline.Calibrate(sim.Setup, null, out _, cancellationToken);
        var calibrationPath = Path.Combine(root, "calibration.json");
        CalibrationFile.Write(calibrationPath, set with { Source = "setup.toml (calibration-laser.csv)" });

        var sb = new StringBuilder();
        sb.Append("# ").Append(spec.Label).Append('\n');
        sb.Append("# One row per item; paths are relative to this file. Columns: docs/batch.md.\n");
        sb.Append("id,setup,files,calibration,timestamp\n");
        foreach (var item in sim.Items)
        {
            var file = Path.GetRelativePath(root, item.File).Replace('\\', '/');
            sb.Append(item.Id).Append(",setup.toml,").Append(file).Append(",calibration.json,").Append(CsvLine.Quote(item.Timestamp)).Append('\n');
        }

        var manifest = Path.Combine(root, "manifest.csv");
        AtomicFile.WriteAllText(manifest, sb.ToString());
        return new DemoArchiveOutput(manifest, calibrationPath, sim);
    }
}
