#!/usr/bin/env python3
"""Size ladder of the LAPACK reference: numpy.linalg.eigvalsh / eigh (LAPACK
zheevd on whichever BLAS/LAPACK numpy links) on random Hermitian matrices of
the sizes of BenchmarkHermitianLadder (eigen_test.go), elements uniform in
[-1, 1) + i[-1, 1) like randomHermitian there.

Each figure is the best of REPEATS repeats (default 5) of the mean over a
run of at least MIN_SECONDS (default 0.5 s), per call: on a machine shared
with other work, many short runs (REPEATS=15 MIN_SECONDS=0.1) find the
quiet moments better. The matrix is copied into a fresh array before each call,
as the Go benchmark copies it into the workspace (numpy copies it again into
Fortran order inside the call, as LAPACK needs).

BLAS threads are set by the environment before numpy loads, e.g.

    OPENBLAS_NUM_THREADS=1 taskset -c 0 /usr/bin/python3 ladder_numpy.py
    OPENBLAS_NUM_THREADS=2 taskset -c 0,1 /usr/bin/python3 ladder_numpy.py

Output: one line per size and kind, wall and CPU time per call:
"values  n=24   35.1 us  cpu 35 us" and so on.
"""
import os
import sys
import time

import numpy as np

SIZES = [6, 24, 96, 192, 384, 768]


def random_hermitian(rng, n):
    h = (2 * rng.random((n, n)) - 1) + 1j * (2 * rng.random((n, n)) - 1)
    h = np.tril(h, -1)
    h = h + h.conj().T
    h[np.diag_indices(n)] = 2 * rng.random(n) - 1
    return h


REPEATS = int(os.environ.get("REPEATS", "5"))
MIN_SECONDS = float(os.environ.get("MIN_SECONDS", "0.5"))


def per_call(fn, h):
    """Seconds per call, wall and CPU (the process's, all threads): best of
    REPEATS repeats of the mean over a run of at least MIN_SECONDS (and 3
    calls)."""
    best, best_cpu = float("inf"), float("inf")
    for _ in range(REPEATS):
        count, start, cpu = 0, time.perf_counter(), time.process_time()
        while True:
            fn(h.copy())
            count += 1
            elapsed = time.perf_counter() - start
            if elapsed >= MIN_SECONDS and count >= 3:
                break
        best = min(best, elapsed / count)
        best_cpu = min(best_cpu, (time.process_time() - cpu) / count)
    return best, best_cpu


def fmt(seconds):
    if seconds < 1e-3:
        return "%.3g us" % (seconds * 1e6)
    return "%.3g ms" % (seconds * 1e3)


def main():
    rng = np.random.default_rng(1)
    print("numpy %s, OPENBLAS_NUM_THREADS=%s, CPUs allowed %d"
          % (np.__version__, os.environ.get("OPENBLAS_NUM_THREADS", "unset"),
             len(os.sched_getaffinity(0))), flush=True)
    sizes = [int(a) for a in sys.argv[1:]] or SIZES
    for n in sizes:
        h = random_hermitian(rng, n)
        for kind, fn in (("values", np.linalg.eigvalsh), ("vectors", np.linalg.eigh)):
            wall, cpu = per_call(fn, h)
            print("%-7s n=%-4d %s  cpu %s" % (kind, n, fmt(wall), fmt(cpu)), flush=True)


if __name__ == "__main__":
    main()
