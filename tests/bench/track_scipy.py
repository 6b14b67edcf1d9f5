#!/usr/bin/python3
"""Per-core speed of `radmode track` against a straightforward NumPy/SciPy implementation
of the same linear finite-element discretization, on the same model files.

    /usr/bin/python3 tests/bench/track_scipy.py --radmode build/radmode [--models 1000]
        [--points 2000] [--count 5]

Models: n = 3 polytropes written by `radmode make polytrope` (Gamma1 from 1.70 down to 1.40,
radius 1 to 10 Rsun: the same family as tests/bench/bench_track.cpp).

SciPy side, per model (one process, one core: sparse solves do not use BLAS threads):
  1. read the table (header after the `#` lines, numpy.loadtxt);
  2. assemble the tridiagonal pencil K x = sigma^2 M x of the energy form (physics.md
     section 4) in units G = M = R = 1, linear elements on the table's nodes, two-point
     Gauss-Legendre quadrature per element, P and rho interpolated log-linearly (linearly when
     an end value is 0), m and Gamma1 linearly, surface terms -4 R^3 P_s and R^6 P_s/(G M);
  3. the lowest `count` eigenvalues with scipy.sparse.linalg.eigsh in shift-invert mode
     (sigma = -1, below every eigenvalue of these stable models), on the full mesh and on the
     every-other-node mesh, then Richardson extrapolation w = w_f + (w_f - w_c)/3 -- the same
     work radmode does by default.
radmode side: `radmode track --jobs 1 --quiet --list LIST` (whole program, one thread).
The script prints models/s for both, the ratio, and the largest relative difference of the
periods found by the two (a check that both solved the same problem).
"""
import argparse
import csv
import os
import subprocess
import sys
import tempfile
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

try:
    import numpy as np
    import scipy.sparse as sp
    import scipy.sparse.linalg as spla
except ImportError as e:  # pragma: no cover
    print("track_scipy: needs numpy and scipy (Debian python3-scipy):", e, file=sys.stderr)
    sys.exit(77)

G = 6.67430e-8
GAUSS = ((1 - 1 / np.sqrt(3)) / 2, (1 + 1 / np.sqrt(3)) / 2)


def read_table(path):
    with open(path) as f:
        lines = f.read().splitlines()
    k = 0
    while lines[k].lstrip().startswith("#") or not lines[k].strip():
        k += 1
    names = lines[k].split()
    data = np.loadtxt(lines[k + 1:])
    return {n: data[:, i] for i, n in enumerate(names)}


def interp_log(a, t):
    lo, hi = a[:-1], a[1:]
    pos = (lo > 0) & (hi > 0)
    out = lo * (1 - t) + hi * t
    out[pos] = np.exp(np.log(lo[pos]) * (1 - t) + np.log(hi[pos]) * t)
    return out


def pencil(r, m, P, rho, g1):
    """Tridiagonal K and M (dimensionless, G = M = R = 1) as scipy.sparse matrices."""
    n = r.size
    h = np.diff(r)
    k00 = np.zeros(n - 1); k01 = np.zeros(n - 1); k11 = np.zeros(n - 1)
    m00 = np.zeros(n - 1); m01 = np.zeros(n - 1); m11 = np.zeros(n - 1)
    for t in GAUSS:
        rr = r[:-1] + t * h
        Pq = interp_log(P, t)
        rhoq = interp_log(rho, t)
        mq = m[:-1] * (1 - t) + m[1:] * t
        gq = g1[:-1] * (1 - t) + g1[1:] * t
        p0, p1 = 1 - t, t
        b0 = 3 * p0 - rr / h          # 3 phi0 + r phi0'
        b1 = 3 * p1 + rr / h          # 3 phi1 + r phi1'
        A = gq * Pq * rr ** 2         # compression
        C = 4 * mq * rhoq * rr        # gravity (G = 1)
        D = rhoq * rr ** 4            # kinetic
        w = h / 2
        k00 += w * (A * b0 * b0 - C * p0 * p0)
        k01 += w * (A * b0 * b1 - C * p0 * p1)
        k11 += w * (A * b1 * b1 - C * p1 * p1)
        m00 += w * D * p0 * p0
        m01 += w * D * p0 * p1
        m11 += w * D * p1 * p1
    kd = np.zeros(n); md = np.zeros(n)
    kd[:-1] += k00; kd[1:] += k11
    md[:-1] += m00; md[1:] += m11
    Ps = P[-1]
    kd[-1] -= 4 * Ps          # -4 R^3 P_s
    md[-1] += Ps              # R^6 P_s / (G M)
    K = sp.diags([k01, kd, k01], [-1, 0, 1], format="csc")
    M = sp.diags([m01, md, m01], [-1, 0, 1], format="csc")
    return K, M


def lowest(r, m, P, rho, g1, count):
    K, M = pencil(r, m, P, rho, g1)
    vals = spla.eigsh(K, k=count, M=M, sigma=-1.0, which="LM", return_eigenvectors=False)
    return np.sort(vals)


def solve_model(path, count):
    t = read_table(path)
    r, m, P, rho, g1 = t["r"], t["m"], t["P"], t["rho"], t["Gamma1"]
    M, R = m[-1], r[-1]
    x, q = r / R, m / M
    Pn = P / (G * M * M / R ** 4)
    rhon = rho / (M / R ** 3)
    fine = lowest(x, q, Pn, rhon, g1, count)
    keep = np.arange(0, x.size, 2)
    if keep[-1] != x.size - 1:
        keep = np.append(keep, x.size - 1)
    coarse = lowest(x[keep], q[keep], Pn[keep], rhon[keep], g1[keep], count)
    sigma2 = fine + (fine - coarse) / 3
    omega2 = sigma2 * G * M / R ** 3
    return 2 * np.pi / np.sqrt(omega2) / 86400.0  # periods [d]


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--radmode", required=True)
    ap.add_argument("--models", type=int, default=1000)
    ap.add_argument("--points", type=int, default=2000)
    ap.add_argument("--count", type=int, default=5)
    a = ap.parse_args()

    with tempfile.TemporaryDirectory(prefix="radmode-track-scipy-") as d:
        paths = []
        for i in range(a.models):
            f = i / max(a.models - 1, 1)
            p = os.path.join(d, "model%d.txt" % i)
            subprocess.run([a.radmode, "make", "polytrope", "--index", "3", "--points",
                            str(a.points), "--gamma1", repr(1.70 - 0.30 * f),
                            "--radius", repr(1.0 + 9.0 * f), "--output", p], check=True)
            paths.append(p)
        lst = os.path.join(d, "list.txt")
        with open(lst, "w") as f:
            f.write("\n".join(paths) + "\n")
        out = os.path.join(d, "track.csv")

        t0 = time.perf_counter()
        rc = subprocess.run([a.radmode, "track", "--jobs", "1", "--quiet", "--count",
                             str(a.count), "--list", lst, "--output", out]).returncode
        t_radmode = time.perf_counter() - t0
        if rc != 0:
            print("track_scipy: radmode track exited with", rc, file=sys.stderr)

        t0 = time.perf_counter()
        periods = [solve_model(p, a.count) for p in paths]
        t_scipy = time.perf_counter() - t0

        with open(out, newline="") as f:
            rows = list(csv.reader(l for l in f if not l.startswith("#")))
        head, rows = rows[0], rows[1:]
        cols = [head.index("period_d_%d" % k) for k in range(a.count)]
        worst = 0.0
        for row, ps in zip(rows, periods):
            for c, p in zip(cols, ps):
                if row[c]:
                    worst = max(worst, abs(float(row[c]) / p - 1))

    n = a.models
    print("models: %d polytropes n = 3, %d points, %d modes, one core" % (n, a.points, a.count))
    print("radmode track --jobs 1: %.3f s, %.1f models/s" % (t_radmode, n / t_radmode))
    print("NumPy/SciPy eigsh     : %.3f s, %.1f models/s" % (t_scipy, n / t_scipy))
    print("radmode / SciPy speed : %.1fx" % (t_scipy / t_radmode))
    print("largest relative period difference: %.2e" % worst)


if __name__ == "__main__":
    main()
