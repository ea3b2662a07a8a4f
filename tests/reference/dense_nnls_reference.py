#!/usr/bin/python3
"""Reference values for the dense-support NNLS benchmark: scipy.optimize.nnls (Lawson-Hanson, dense) on the same
problems the C# benchmarks solve.

The problems (SIMULATED DATA, see benchmarks/OrderUnfold.Benchmarks/DenseSupportCase.cs) are exported by

    dotnet run -c Release --project benchmarks/OrderUnfold.Benchmarks -- --export-dense DIR

which writes DIR/<rows>x<bins>/{A.f64, y.f64, sweep.i32, shape.txt}. This script then solves

    min over s >= 0 and free backgrounds b_k of  1/2 ||A s + b - y||^2 + 1/2 mu ||D s||^2

(D: first differences). scipy's nnls has no free entries, so each sweep's background is removed exactly by centring
that sweep's rows of A and y (the minimum over b_k); the smoothness term becomes extra rows sqrt(mu) D. It records
the objective and the CPU time of the nnls call alone (one thread: run with OPENBLAS_NUM_THREADS=1).

    OPENBLAS_NUM_THREADS=1 /usr/bin/python3 tests/reference/dense_nnls_reference.py DIR [OUT] [SIZES...]
"""
import os
import platform
import sys
import time

import numpy as np
import scipy
from scipy.optimize import nnls


def load(folder):
    rows, bins, mu = open(os.path.join(folder, "shape.txt")).read().split()
    rows, bins, mu = int(rows), int(bins), float(mu)
    a = np.fromfile(os.path.join(folder, "A.f64"), dtype="<f8").reshape(rows, bins)
    y = np.fromfile(os.path.join(folder, "y.f64"), dtype="<f8")
    sweep = np.fromfile(os.path.join(folder, "sweep.i32"), dtype="<i4")
    return a, y, sweep, mu


def main():
    root = sys.argv[1]
    out = sys.argv[2] if len(sys.argv) > 2 else None
    sizes = sys.argv[3:] or ["4000x1000", "8000x2000", "16000x4000"]
    lines = [
        f"# scipy.optimize.nnls reference (scipy {scipy.__version__}, numpy {np.__version__}, Python {platform.python_version()}, "
        f"Debian package /usr/bin/python3)",
        f"# machine: {platform.machine()}, {os.cpu_count()} logical cores; load average at start {os.getloadavg()[0]:.2f}",
        "# objective = 1/2 ||A s + b - y||^2 + 1/2 mu ||D s||^2 (whitened units) at scipy's solution; cpu_s = process CPU time of the nnls call",
        "size\trows\tbins\tmu\tobjective\tcpu_s\twall_s\tpositive_bins\tload_end",
    ]
    for size in sizes:
        a, y, sweep, mu = load(os.path.join(root, size))
        rows, bins = a.shape
        for k in np.unique(sweep):
            idx = sweep == k
            a[idx] -= a[idx].mean(axis=0)
            y[idx] = y[idx] - y[idx].mean()
        if mu > 0:
            d = np.zeros((bins - 1, bins))
            i = np.arange(bins - 1)
            d[i, i] = -np.sqrt(mu)
            d[i, i + 1] = np.sqrt(mu)
            a = np.vstack([a, d])
            y = np.concatenate([y, np.zeros(bins - 1)])
        a = np.asfortranarray(a)
        cpu0, wall0 = time.process_time(), time.perf_counter()
        s, rnorm = nnls(a, y, maxiter=50 * bins)
        cpu, wall = time.process_time() - cpu0, time.perf_counter() - wall0
        objective = 0.5 * rnorm * rnorm
        line = f"{size}\t{rows}\t{bins}\t{mu!r}\t{objective!r}\t{cpu:.2f}\t{wall:.2f}\t{int(np.count_nonzero(s > 0))}\t{os.getloadavg()[0]:.2f}"
        print(line, flush=True)
        lines.append(line)
        del a
    text = "\n".join(lines) + "\n"
    if out:
        with open(out, "w") as f:
            f.write(text)
    else:
        print(text)


if __name__ == "__main__":
    main()
