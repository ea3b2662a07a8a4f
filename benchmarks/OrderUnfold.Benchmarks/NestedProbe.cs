using OrderUnfold.Inversion;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// Experiment (issue 15, dense support): nested iteration on the dense benchmark problems. The problem is solved on grids
/// with 2×, 4×, … wider bins over the same window (same sweeps, offsets and gains; the coarse grid's own operator), each
/// coarse solution prolonged (linear interpolation of the density) to the next finer grid as the projected Newton
/// method's starting point. Prints Newton steps, products and CPU per level and in all.
/// </summary>
public static class NestedProbe
{
    public static void Run(TextWriter output, int levels, double muDivisor, bool warmFace)
    {
        using var process = System.Diagnostics.Process.GetCurrentProcess();
        if (OperatingSystem.IsLinux() || OperatingSystem.IsWindows()) process.ProcessorAffinity = 1;
        DenseNnls.Solve(DenseSupportCase.Create(4000, 1000).Problem());
        output.WriteLine($"levels {levels}, coarse mu = mu / {muDivisor} per level, warm face {warmFace}");
        output.WriteLine("rows\tbins\tcpu_s\tnewton\tproducts\tobjective\tper level (bins: newton/products/cpu)\tstatus");
        foreach (var (rows, bins) in DenseNnlsBenchmarks.Sizes)
        {
            var c = DenseSupportCase.Create(rows, bins);
            var fine = c.Problem();
            // the problems are built outside the timing (the unfold builds its own problem once too)
            var problems = new List<UnfoldProblem> { fine };
            var grid = c.Grid;
            var mu = fine.SmoothnessWeight;
            // levels < 0: coarsen down to about 500 bins
            for (var l = 0; levels < 0 ? grid.Count / 2 >= 500 : l < levels; l++)
            {
                grid = new FrequencyGrid(grid.StartHz + 0.5 * grid.StepHz, 2 * grid.StepHz, grid.Count / 2);
                mu /= muDivisor;
                problems.Add(new UnfoldProblem(c.Sweeps, grid, c.OffsetsHz, c.Gains, 0, mu, c.PeriodicStepHz));
            }

            process.Refresh();
            var cpu0 = process.TotalProcessorTime;
            double[] start = [];
            var newton = 0;
            var products = 0;
            var detail = "";
            NnlsResult r = null!;
            for (var l = problems.Count - 1; l >= 0; l--)
            {
                process.Refresh();
                var t0 = process.TotalProcessorTime;
                r = DenseNnls.Solve(problems[l], new DenseNnls.Options { WarmFace = warmFace }, start);
                process.Refresh();
                newton += r.Iterations;
                products += r.Products;
                detail += $"{problems[l].Grid.Count}: {r.Iterations}/{r.Products}/{(process.TotalProcessorTime - t0).TotalSeconds:F3}  ";
                if (l > 0)
                {
                    start = Prolong(r.Solution, problems[l].Grid.Count, problems[l - 1].Grid.Count);
                    if (l == 1) detail += $"[start objective {c.Objective(fine, start):G10}, zeros {start.Take(bins).Count(v => v <= 0)}]  ";
                }
            }

            process.Refresh();
            var cpu = (process.TotalProcessorTime - cpu0).TotalSeconds;
            output.WriteLine($"{rows}\t{bins}\t{cpu:F3}\t{newton}\t{products}\t{c.Objective(fine, r.Solution):R}\t{detail}\t{r.Status}");
        }
    }

    /// <summary>The ceiling of any coarse-grid warm start: the fine optimum restricted to the coarse grid (X_i = x_2i + x_2i+1)
    /// and prolonged back, as the start of a second fine solve; for 1, 2, 3 coarsenings.</summary>
    public static void Oracle(TextWriter output, bool warmFace, bool exactZeros)
    {
        DenseNnls.Solve(DenseSupportCase.Create(4000, 1000).Problem());
        output.WriteLine($"oracle start (fine optimum restricted and prolonged), warm face {warmFace}, optimum's zeros imposed {exactZeros}");
        foreach (var (rows, bins) in DenseNnlsBenchmarks.Sizes)
        {
            var c = DenseSupportCase.Create(rows, bins);
            var fine = c.Problem();
            var best = DenseNnls.Solve(fine);
            var line = $"{rows}\t{bins}\tcold {best.Iterations}/{best.Products}";
            for (var levels = 1; levels <= 3; levels++)
            {
                var x = best.Solution;
                var counts = new List<int>();
                var n = bins;
                for (var l = 0; l < levels; l++)
                {
                    counts.Add(n);
                    var coarse = new double[n / 2 + x.Length - n];
                    for (var i = 0; i < n / 2; i++) coarse[i] = x[2 * i] + x[2 * i + 1];
                    for (var k = 0; k < x.Length - n; k++) coarse[n / 2 + k] = x[n + k];
                    x = coarse;
                    n /= 2;
                }

                for (var l = levels - 1; l >= 0; l--)
                {
                    x = Prolong(x, n, counts[l]);
                    n = counts[l];
                }

                if (exactZeros)
                    for (var j = 0; j < bins; j++)
                        if (best.Solution[j] <= 0) x[j] = 0;
                var r = DenseNnls.Solve(fine, new DenseNnls.Options { WarmFace = warmFace }, x);
                line += $"\t{levels} level(s): start {c.Objective(fine, x):G10} zeros {x.Take(bins).Count(v => v <= 0)} → {r.Iterations}/{r.Products} {c.Objective(fine, r.Solution):G12}";
            }

            output.WriteLine(line);
        }
    }

    /// <summary>Coarse solution (nc bins of width 2h, then the backgrounds) → fine grid (nf bins of width h): the density
    /// X/(2h) interpolated linearly to the fine bins' centres, times h; backgrounds copied.</summary>
    public static double[] Prolong(double[] coarse, int nc, int nf)
    {
        var fine = new double[nf + coarse.Length - nc];
        for (var i = 0; i < nc; i++)
        {
            var left = i > 0 ? coarse[i - 1] : coarse[i];
            var right = i + 1 < nc ? coarse[i + 1] : coarse[i];
            fine[2 * i] = 0.5 * (0.75 * coarse[i] + 0.25 * left);
            if (2 * i + 1 < nf) fine[2 * i + 1] = 0.5 * (0.75 * coarse[i] + 0.25 * right);
        }

        for (var j = 2 * nc; j < nf; j++) fine[j] = 0.5 * coarse[nc - 1];
        for (var k = 0; k < coarse.Length - nc; k++) fine[nf + k] = coarse[nc + k];
        return fine;
    }
}
