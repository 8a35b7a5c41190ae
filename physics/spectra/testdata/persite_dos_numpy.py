#!/usr/bin/env python3
"""Per-site phonon DOS of a force-constant model file, in numpy: the
reference that modegrid's per-site DOS at size is measured against
(persite_dos_bench.sh runs both; DEVELOPERS.md has the figures).

It does the same work as `modegrid dos --per-site` on a model of explicit
force-constant blocks (the protobuf JSON model files that
TestWritePerSiteModels writes):

  * D(q) = sum_R Phi(R) exp(2 pi i q.R) / sqrt(m_i m_j) for every point of a
    Gamma-centred N x N x N grid up to time reversal: q and -q have complex
    conjugate matrices, so the same frequencies and site weights, and only
    one of each pair is diagonalised, with weight 2 ((N^3 + 8)/2 points for
    even N) -- exactly the points modegrid diagonalises for a crystal whose
    only symmetry is the identity. The blocks are stacked by lattice vector
    R and the matrices of a batch of q-points built as two real matrix
    products (cos and sin of the phases times the stack);
  * eigenvalues and eigenvectors by numpy.linalg.eigh (LAPACK zheevd);
  * the site weight of each mode, the sum over its three components of
    |e|^2 on the site;
  * the DOS on the samples nu_i = min + i*step, each the average over its
    bin [nu_i - step/2, nu_i + step/2), states per cell per THz, per site and
    in total: --method histogram counts the modes of each bin (the same
    definition as modegrid's histogram DOS, which the check compares to
    rounding); --method gaussian convolves that histogram with a Gaussian
    of standard deviation --width averaged over a bin, cut at 8 widths
    (modegrid places each mode exactly; the two differ by the placement of
    the modes within a bin, a few tenths of a percent).

Frequencies: nu = sqrt(lambda) / 2 pi in THz for lambda in eV/A^2/amu, with
e and the atomic mass constant of CODATA 2018; a negative lambda gives a
negative nu (kept in its bin like modegrid's --show-imaginary).

Usage:
  persite_dos_numpy.py MODEL.json --grid N --min 0 --max 15 --step 0.03 \
      [--method gaussian --width 0.15] [--batch 16] [--out DOS.csv] \
      [--compare MODEGRID.csv]
Threads: OPENBLAS_NUM_THREADS (set it to 1 or 2).
"""

import argparse
import csv
import json
import math
import sys
import time

import numpy as np

# CODATA 2018: elementary charge (C) and atomic mass constant (kg).
E_CHARGE = 1.602176634e-19
AMU = 1.66053906660e-27
# sqrt(eV/A^2/amu) as an angular frequency, divided by 2 pi, in THz.
NU_UNIT_THZ = math.sqrt(E_CHARGE * 1e20 / AMU) / (2 * math.pi) / 1e12


def load(path):
    """The model file: lattice (rows, A), masses (amu), blocks stacked by
    lattice vector: cells (R x 3 integers) and phi (R x 3n x 3n, eV/A^2/amu,
    mass-weighted), each block's reverse (j, i, -R, Phi^T) included."""
    with open(path) as f:
        m = json.load(f)
    if m.get("springs") or m.get("shells"):
        sys.exit("only models of explicit blocks are read")
    if m.get("forceUnit", "FORCE_UNIT_EV_PER_A2") not in ("FORCE_UNIT_EV_PER_A2", "FORCE_UNIT_UNSPECIFIED"):
        sys.exit("only eV/A^2 is read")
    masses = np.array([s["massAmu"] for s in m["sites"]])
    n = len(masses)
    index = {}
    parts = []

    def add(i, j, cell, phi):
        k = index.setdefault(cell, len(index))
        parts.append((k, i, j, phi / math.sqrt(masses[i] * masses[j])))

    for b in m["blocks"]:
        i, j = b.get("fromSite", 0), b.get("toSite", 0)
        cell = tuple(b.get("cell", [0, 0, 0]))
        phi = np.array(b["phi"], dtype=float).reshape(3, 3)
        if i == j and not any(cell):
            add(i, i, cell, (phi + phi.T) / 2)  # an on-site block: its symmetric part
            continue
        add(i, j, cell, phi)
        add(j, i, tuple(-c for c in cell), phi.T)
    cells = np.array(list(index), dtype=float)
    stack = np.zeros((len(index), 3 * n, 3 * n))
    for k, i, j, phi in parts:
        stack[k, 3 * i:3 * i + 3, 3 * j:3 * j + 3] += phi
    return masses, cells, stack


def grid_points(nq):
    """The Gamma-centred nq^3 grid up to time reversal: fractional q and
    weights (2 for a pair q, -q; 1 for a point that is its own partner)."""
    idx = np.indices((nq, nq, nq)).reshape(3, -1).T
    flat = (idx[:, 0] * nq + idx[:, 1]) * nq + idx[:, 2]
    neg = (-idx) % nq
    partner = (neg[:, 0] * nq + neg[:, 1]) * nq + neg[:, 2]
    keep = flat <= partner
    weights = np.where(flat[keep] == partner[keep], 1.0, 2.0)
    return idx[keep] / nq, weights


def modes(cells, stack, qs, batch):
    """Frequencies (THz) and site weights of every q, in batches."""
    n3 = stack.shape[1]
    flat = stack.reshape(len(stack), -1)
    freqs, weights = [], []
    t_build = t_eigh = 0.0
    for lo in range(0, len(qs), batch):
        t0 = time.perf_counter()
        theta = 2 * math.pi * qs[lo:lo + batch] @ cells.T  # (Q, R)
        d = (np.cos(theta) @ flat + 1j * (np.sin(theta) @ flat)).reshape(-1, n3, n3)
        t1 = time.perf_counter()
        lam, vec = np.linalg.eigh(d)  # vec[q, component, mode]
        t2 = time.perf_counter()
        freqs.append(np.sign(lam) * np.sqrt(np.abs(lam)) * NU_UNIT_THZ)
        w = np.abs(vec) ** 2
        weights.append(w.reshape(w.shape[0], n3 // 3, 3, n3).sum(axis=2))  # [q, site, mode]
        t_build += t1 - t0
        t_eigh += t2 - t1
    return np.concatenate(freqs), np.concatenate(weights), t_build, t_eigh


def dos(freqs, sweights, qweights, npoints, lo, step, samples, method, width):
    """Per-site and total DOS on the samples lo + i*step (see the module
    documentation)."""
    nsites = sweights.shape[1]
    bins = np.floor((freqs - lo) / step + 0.5).astype(np.int64)  # bin of nu: [nu_i - step/2, nu_i + step/2)
    ok = (bins >= 0) & (bins < samples)
    w = np.broadcast_to(qweights[:, None, None], sweights.shape) * sweights  # [q, site, mode]
    persite = np.zeros((nsites, samples))
    b = bins[ok]
    wsites = w.transpose(1, 0, 2)[:, ok]  # [site, modes in the window]
    for s in range(nsites):
        persite[s] = np.bincount(b, weights=wsites[s], minlength=samples)
    persite /= npoints * step
    if method == "gaussian":
        half = int(math.ceil(8 * width / step))
        x = np.arange(-half, half + 1) * step
        cdf = lambda u: 0.5 * (1 + np.vectorize(math.erf)(u / (width * math.sqrt(2))))
        kernel = cdf(x + step / 2) - cdf(x - step / 2)
        persite = np.array([np.convolve(row, kernel, mode="same") for row in persite])
    return persite.sum(axis=0), persite


def compare(path, total, persite):
    """Largest difference from a modegrid CSV (columns frequency, dos,
    integrated, one per site), relative to the largest total DOS."""
    with open(path) as f:
        rows = list(csv.reader(f))
    data = np.array([[float(x) for x in r] for r in rows[1:]])
    scale = total.max()
    d_total = np.abs(data[:, 1] - total).max() / scale
    d_sites = np.abs(data[:, 3:].T - persite).max() / scale
    l1 = np.abs(data[:, 1] - total).sum() / np.abs(total).sum()
    return d_total, d_sites, l1


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("model")
    p.add_argument("--grid", type=int, required=True)
    p.add_argument("--min", type=float, default=0.0)
    p.add_argument("--max", type=float, required=True)
    p.add_argument("--step", type=float, required=True)
    p.add_argument("--method", choices=["gaussian", "histogram"], default="gaussian")
    p.add_argument("--width", type=float, default=0.15)
    p.add_argument("--batch", type=int, default=16)
    p.add_argument("--out")
    p.add_argument("--compare")
    a = p.parse_args()

    t0 = time.perf_counter()
    masses, cells, stack = load(a.model)
    qs, qw = grid_points(a.grid)
    t1 = time.perf_counter()
    freqs, sweights, t_build, t_eigh = modes(cells, stack, qs, a.batch)
    t2 = time.perf_counter()
    samples = int(math.floor((a.max - a.min) / a.step + 1e-9)) + 1
    total, persite = dos(freqs, sweights, qw, a.grid ** 3, a.min, a.step, samples, a.method, a.width)
    t3 = time.perf_counter()
    print(f"sites {len(masses)}, cells {len(cells)}, grid {a.grid}^3, diagonalised {len(qs)}, "
          f"load {t1 - t0:.2f} s, build D {t_build:.2f} s, eigh {t_eigh:.2f} s, "
          f"DOS {t3 - t2:.2f} s, total {t3 - t0:.2f} s")
    if a.out:
        with open(a.out, "w", newline="") as f:
            wr = csv.writer(f)
            wr.writerow(["frequency_thz", "dos"] + [f"site_{s}" for s in range(len(masses))])
            for i in range(samples):
                wr.writerow([a.min + i * a.step, total[i]] + list(persite[:, i]))
    if a.compare:
        d_total, d_sites, l1 = compare(a.compare, total, persite)
        print(f"against {a.compare}: largest difference {d_total:.2e} (total), {d_sites:.2e} (sites) "
              f"of the largest DOS; L1 {l1:.2e}")


if __name__ == "__main__":
    main()
