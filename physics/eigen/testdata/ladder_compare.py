#!/usr/bin/env python3
"""Runs the size ladder of the eigensolver beside the numpy reference in one
sitting and prints the markdown table of DEVELOPERS.md ("Measured:
eigensolver size ladder").

For each CPU set (one core: taskset -c 0, GOMAXPROCS=1,
OPENBLAS_NUM_THREADS=1; two cores: taskset -c 0,1, GOMAXPROCS=2,
OPENBLAS_NUM_THREADS=2) and each size, it runs BenchmarkHermitianLadder of
the lapack build (go: the pure-Go path forced; lapack: the LAPACK path
forced; auto: what the shipped build does) and then ladder_numpy.py on the
same size, so that drift in the machine's load touches both alike. Each Go
figure is the least of COUNT runs (default 3) of BENCHTIME (default 0.5 s);
each numpy figure the best of REPEATS runs of MIN_SECONDS (ladder_numpy.py;
the same numbers by default). On a machine shared with other work, many
short runs find its quiet moments: COUNT=REPEATS=15, BENCHTIME=0.1s,
MIN_SECONDS=0.1.

CORES=1 or CORES=2 runs one of the two CPU sets only. WAIT_IDLE=1 waits
before each size until no other process has been runnable for 3 s.
ROUNDS=k measures each size k times (each after its wait) and keeps the
best figure of each cell, ours and numpy's alike.

Usage, from physics/eigen:
    CGO_ENABLED=1 go test -c -tags lapack -o /tmp/eigen-lapack.test .
    /usr/bin/python3 testdata/ladder_compare.py /tmp/eigen-lapack.test [sizes...]
"""
import os
import re
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
SIZES = [6, 24, 96, 192, 384, 768]
CONFIGS = [("1 core", "0", "1"), ("2 cores", "0,1", "2")]
UNITS = {"us": 1e-6, "ms": 1e-3}


def go_times(binary, cpus, threads, n):
    env = dict(os.environ, GOMAXPROCS=threads, OPENBLAS_NUM_THREADS=threads)
    out = subprocess.run(
        ["taskset", "-c", cpus, binary, "-test.run", "^$",
         "-test.bench", "HermitianLadder/.*/n=%d/" % n,
         "-test.benchtime", os.environ.get("BENCHTIME", "0.5s"),
         "-test.count", os.environ.get("COUNT", "3")],
        env=env, check=True, capture_output=True, text=True, cwd=os.path.dirname(HERE)).stdout
    times = {}
    pat = r"HermitianLadder/(\w+)/n=\d+/(\w+)(?:-\d+)?\s+\d+\s+([\d.]+) ns/op\s+([\d.]+) cpu-ns/op"
    for m in re.finditer(pat, out):
        for key, v in (((m.group(1), m.group(2)), m.group(3)), ((m.group(1), m.group(2), "cpu"), m.group(4))):
            times[key] = min(times.get(key, float("inf")), float(v) * 1e-9)
    return times


def numpy_times(cpus, threads, n):
    env = dict(os.environ, OPENBLAS_NUM_THREADS=threads)
    out = subprocess.run(
        ["taskset", "-c", cpus, "/usr/bin/python3", os.path.join(HERE, "ladder_numpy.py"), str(n)],
        env=env, check=True, capture_output=True, text=True).stdout
    times = {}
    for m in re.finditer(r"^(\w+)\s+n=\d+\s+([\d.e+-]+) (us|ms)  cpu ([\d.e+-]+) (us|ms)$", out, re.M):
        times[m.group(1)] = float(m.group(2)) * UNITS[m.group(3)]
        times[(m.group(1), "cpu")] = float(m.group(4)) * UNITS[m.group(5)]
    return times


def wait_idle():
    """With WAIT_IDLE=1, waits (up to 10 min) until no other process has
    been runnable for 3 s (procs_running of /proc/stat counts this one):
    on a shared machine, each size is then measured in a quiet spell."""
    if os.environ.get("WAIT_IDLE") != "1":
        return
    deadline, quiet = time.time() + 600, 0
    while time.time() < deadline and quiet < 6:
        with open("/proc/stat") as f:
            running = int(re.search(r"^procs_running (\d+)", f.read(), re.M).group(1))
        quiet = quiet + 1 if running <= 1 else 0
        time.sleep(0.5)


def fmt(seconds):
    if seconds < 1e-3:
        return "%.3g µs" % (seconds * 1e6)
    return "%.3g ms" % (seconds * 1e3)


def main():
    binary = os.path.abspath(sys.argv[1])
    sizes = [int(a) for a in sys.argv[2:]] or SIZES
    configs = [c for c in CONFIGS if os.environ.get("CORES", "1,2").find(c[2]) >= 0]
    for name, cpus, threads in configs:
        print("\n%s (taskset -c %s, GOMAXPROCS=%s, OPENBLAS_NUM_THREADS=%s)\n"
              % (name, cpus, threads, threads))
        print("| n | mode | ours, pure Go | ours, LAPACK path | ours, shipped | numpy (LAPACK) | shipped / numpy | CPU time: shipped / numpy |")
        print("|---|---|---|---|---|---|---|---|")
        rounds = int(os.environ.get("ROUNDS", "1"))
        for n in sizes:
            g, p = {}, {}
            for _ in range(rounds):
                wait_idle()
                for acc, new in ((g, go_times(binary, cpus, threads, n)), (p, numpy_times(cpus, threads, n))):
                    for k, v in new.items():
                        acc[k] = min(acc.get(k, float("inf")), v)
            for mode in ("values", "vectors"):
                auto, ref = g[(mode, "auto")], p[mode]
                print("| %d | %s | %s | %s | %s | %s | %.2f | %s / %s |" % (
                    n, mode, fmt(g[(mode, "go")]), fmt(g[(mode, "lapack")]), fmt(auto), fmt(ref), auto / ref,
                    fmt(g[(mode, "auto", "cpu")]), fmt(p[(mode, "cpu")])), flush=True)


if __name__ == "__main__":
    main()
