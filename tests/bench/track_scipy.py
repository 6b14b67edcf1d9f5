#!/usr/bin/python3
"""Per-core speed of `radmode track` against a straightforward NumPy/SciPy implementation
of the same linear finite-element discretization, on the same model files.

    /usr/bin/python3 tests/bench/track_scipy.py --radmode build/radmode [--models 1000]
        [--points 2000] [--count 5] [--baseline same|simple|both] [--repeat 1] [--passes 10]
        [--chunks 10]

Models: n = 3 polytropes written by `radmode make polytrope` (Gamma1 from 1.70 down to 1.40,
radius 1 to 10 Rsun: the same family as tests/bench/bench_track.cpp).

SciPy side, per model (one process, one core: sparse solves do not use BLAS threads). Two
baselines; `--baseline` picks one or both, and the output names the one that ran.

`same` (default): radmode's own discretization (docs/numerics.md "How the table is read
between its points" and "Quadrature"; src/structure.cpp, src/discretize.cpp,
src/pencil_block.cpp), written with NumPy array operations over all table intervals at once:
  1. read the table (header after the `#` lines, numpy.loadtxt); a table whose first radius
     is > 0 gets radmode's uniform-density core (r = 0, m = 0, rho = rho_0, Gamma1 = Gamma1_0,
     P_c = P_0 + (2 pi/3) G rho_0^2 r_0^2); repeated radii (discontinuities) are refused, as
     the benchmark models have none;
  2. per row: dm/dr = 4 pi r^2 rho, dP/dr = -G m rho / r^2 (0 at r = 0), ln P, ln rho,
     d ln P/dr = (dP/dr)/P, and d ln rho/dr by three-point differences (the derivative of the
     parabola through the row and its neighbours; one-sided parabola at the ends of each run
     of rows with rho > 0; NaN outside such runs);
  3. per interval, cubic Hermite curves with end slopes per unit t = h * d/dr: m (linear if
     the cubic is not monotone by the Fritsch-Carlson test), log rho (else rho as a cubic with
     slopes rho d ln rho/dr, else log-linear, else linear when an end is 0), P as the cubic in
     log P or in P (slopes from dP/dr), whichever is usable (monotone, finite slopes); where
     both are, the one whose dP/dt at t = 1/2 is closer to hydrostatic equilibrium
     -G m rho h / r^2 there; where neither is, log-linear, or linear when an end is 0; Gamma1
     linear; in an interval whose outer density is 0, rho = rho_j (1 - t)^alpha, alpha fitted
     to the row below (the n = 3 polytrope's last interval takes this branch);
  4. the curves sampled at 3-point Gauss-Legendre points of every interval; in units
     G = M = R = 1 (x = r/R, the surface node exactly 1) the coefficients
     a = Gamma1 P x^4, b = 3 Gamma1 P x^3, c = 9 Gamma1 P x^2 - 4 m rho x, d = rho x^4, and the
     element integrals of the hat functions give the tridiagonal pencil K x = sigma^2 M x;
     surface terms -4 P_s (on K) and P_s (on M) at the last node;
  5. the coarse pencil for Richardson extrapolation: every other node (an odd count of
     intervals puts one single-interval element at the centre), as the Galerkin restriction
     P^T K P, P^T M P of the fine pencil, which equals assembling the coarse hat functions at
     the fine mesh's quadrature points (the same sampled model);
  6. the lowest `count` eigenvalues of both pencils with scipy.sparse.linalg.eigsh in
     shift-invert mode (sigma = -1, below every eigenvalue of these stable models), then
     omega^2 = omega^2_f + (omega^2_f - omega^2_c)/3 -- the same work radmode does by default.
  Every operation is written in the order radmode's C++ code uses: with NumPy's exp, log and
  pow taken from the C library (run with NPY_DISABLE_CPU_FEATURES="AVX512F AVX512CD
  AVX512_SKX AVX512_CLX AVX512_CNL AVX512_ICL" on a processor with AVX-512) both pencils,
  fine and coarse, are radmode's bit for bit. NumPy's own AVX-512 exp and log differ from the
  C library's by an ulp in about a quarter of the arguments; that is enough to flip radmode's
  log-or-linear pressure choice in some intervals of the inner third of the star, where the
  two cubics fit hydrostatic equilibrium equally well to round-off, and moves the pencil
  entries by up to a few 1e-12 relative. Either way the periods agree to the accuracy of the
  two eigen-solvers on this pencil: a few 1e-12 at most (docs/dev-scipy-baseline.md).

`simple`: the earlier, simpler baseline (not radmode's discretization): linear elements on the
  table's nodes, two-point Gauss-Legendre quadrature per interval, P and rho interpolated
  log-linearly (linearly when an end value is 0), m and Gamma1 linearly, the same surface
  terms; its coarse mesh interpolates the every-other-row table again (its own sampled
  model); eigsh shift-invert and Richardson as above. Its periods differ from radmode's by
  the interpolation and quadrature differences (up to 4.4e-10 relative on these models).

radmode side: `radmode track --jobs 1 --quiet --list LIST` (whole program, one thread).
The script prints models/s for radmode and each baseline that ran (wall clock and CPU time:
on a shared machine the CPU time is the fairer measure), the ratios, and for each baseline
the largest relative difference of the periods found by it and by radmode. A round
alternates `--chunks` times (default 10) between radmode and the baselines, each time on the
next slice of the models, radmode running its slice `--passes` times (default 10) in one
call; each side's times are summed over the round and reported per list of models. The speed
of a shared machine drifts by tens of per cent within minutes; alternating makes both sides
sample the same minutes. With `--repeat R` it runs R rounds and prints every round, the
median and range of the rounds' CPU-time ratios, and the ratio of the fastest round of each.
"""
import argparse
import csv
import os
import resource
import statistics
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

G = 6.67430e-8          # cm^3 g^-1 s^-2 (CODATA 2018, as include/radmode/constants.hpp)
DAY_S = 86400.0
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


def lowest(K, M, count):
    vals = spla.eigsh(K, k=count, M=M, sigma=-1.0, which="LM", return_eigenvectors=False)
    return np.sort(vals)


def tridiagonal(diag, off):
    return sp.diags([off, diag, off], [-1, 0, 1], format="csc")


# ---------------------------------------------------------------------------------------
# Baseline `simple`: log-linear P and rho, two Gauss points, coarse mesh re-interpolated.

def interp_log(a, t):
    lo, hi = a[:-1], a[1:]
    pos = (lo > 0) & (hi > 0)
    out = lo * (1 - t) + hi * t
    out[pos] = np.exp(np.log(lo[pos]) * (1 - t) + np.log(hi[pos]) * t)
    return out


def simple_pencil(r, m, P, rho, g1):
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
    return tridiagonal(kd, k01), tridiagonal(md, m01)


def simple_lowest(r, m, P, rho, g1, count):
    return lowest(*simple_pencil(r, m, P, rho, g1), count)


def solve_simple(path, count):
    t = read_table(path)
    r, m, P, rho, g1 = t["r"], t["m"], t["P"], t["rho"], t["Gamma1"]
    M, R = m[-1], r[-1]
    x, q = r / R, m / M
    Pn = P / (G * M * M / R ** 4)
    rhon = rho / (M / R ** 3)
    fine = simple_lowest(x, q, Pn, rhon, g1, count)
    keep = np.arange(0, x.size, 2)
    if keep[-1] != x.size - 1:
        keep = np.append(keep, x.size - 1)
    coarse = simple_lowest(x[keep], q[keep], Pn[keep], rhon[keep], g1[keep], count)
    sigma2 = fine + (fine - coarse) / 3
    omega2 = sigma2 * G * M / R ** 3
    return 2 * np.pi / np.sqrt(omega2) / DAY_S  # periods [d]


# ---------------------------------------------------------------------------------------
# Baseline `same`: radmode's discretization (src/structure.cpp, src/discretize.cpp,
# src/pencil_block.cpp), the operations in the order of the C++ code.

LINEAR, LOG_LINEAR, HERMITE, LOG_HERMITE, POWER_TO_ZERO = range(5)
GL3_Z = np.sqrt(0.6)    # 3-point Gauss-Legendre on [0, 1] (Abramowitz & Stegun, Table 25.4)
GL3_T = np.array([0.5 * (1 - GL3_Z), 0.5, 0.5 * (1 + GL3_Z)])
GL3_W = np.array([5.0 / 18.0, 8.0 / 18.0, 5.0 / 18.0])


def hermite_basis(t):
    """Cubic Hermite basis h00, h10, h01, h11 and its t-derivatives at t (scalar or array)."""
    t2 = t * t
    t3 = t2 * t
    return (2 * t3 - 3 * t2 + 1, t3 - 2 * t2 + t, -2 * t3 + 3 * t2, t3 - t2,
            6 * t2 - 6 * t, 3 * t2 - 4 * t + 1, -6 * t2 + 6 * t, 3 * t2 - 2 * t)


BASIS_Q = hermite_basis(GL3_T[:, None])   # each (3, 1): broadcasts over the intervals
BASIS_MID = hermite_basis(0.5)


def monotone(f0, f1, g0, g1):
    """Fritsch-Carlson: the cubic with end values f0, f1 and slopes per unit t g0, g1 stays
    monotone (NaN slopes give False)."""
    delta = f1 - f0
    ok = (g0 * delta >= 0) & (g1 * delta >= 0) & (g0 * g0 + g1 * g1 <= 9.0 * (delta * delta))
    return np.where(delta == 0, (g0 == 0) & (g1 == 0), ok)


def run_slopes(r, f):
    """d f/dr at each row of one run: the parabola through a row and its neighbours (one-sided
    at the ends), the secant for two rows."""
    if r.size == 2:
        s = (f[1] - f[0]) / (r[1] - r[0])
        return np.array([s, s])
    out = np.empty(r.size)
    h1, h2 = r[1:-1] - r[:-2], r[2:] - r[1:-1]
    d1, d2 = f[1:-1] - f[:-2], f[2:] - f[1:-1]
    out[1:-1] = (h2 * h2 * d1 + h1 * h1 * d2) / (h1 * h2 * (h1 + h2))
    for j, (a, b, c) in ((0, (0, 1, 2)), (-1, (-3, -2, -1))):
        x, xa, xb, xc = r[j], r[a], r[b], r[c]
        la = ((x - xb) + (x - xc)) / ((xa - xb) * (xa - xc))
        lb = ((x - xa) + (x - xc)) / ((xb - xa) * (xb - xc))
        lc = ((x - xa) + (x - xb)) / ((xc - xa) * (xc - xb))
        out[j] = la * f[a] + lb * f[b] + lc * f[c]
    return out


def log_density_slopes(r, rho, lnrho):
    """d ln rho/dr by run_slopes inside each run of rows with rho > 0; NaN elsewhere."""
    out = np.full(r.size, np.nan)
    cont = (rho[1:] > 0) & (rho[:-1] > 0)
    ends = np.flatnonzero(~cont) + 1                     # first row of each new run
    lo = 0
    for hi in list(ends) + [r.size]:                     # one pass per run, not per row
        if hi - 1 > lo and rho[lo] > 0:
            out[lo:hi] = run_slopes(r[lo:hi], lnrho[lo:hi])
        lo = hi
    return out


class Curves:
    """One quantity on every interval: end values f0, f1, end slopes per unit t g0, g1 (in
    log space for the log shapes; alpha in g0 for POWER_TO_ZERO) and the shape."""

    def __init__(self, f0, f1, g0, g1, shape):
        self.f0, self.f1, self.g0, self.g1, self.shape = f0, f1, g0, g1, shape

    def value(self, t, b):
        """Values at local coordinate t (scalar, or (q, 1) array with basis b)."""
        s = self.shape
        herm = (s == HERMITE) | (s == LOG_HERMITE)
        v = np.where(herm, b[0] * self.f0 + b[1] * self.g0 + b[2] * self.f1 + b[3] * self.g1,
                     self.f0 + t * (self.f1 - self.f0))
        logs = (s == LOG_HERMITE) | (s == LOG_LINEAR)
        np.exp(v, out=v, where=logs)
        power = np.flatnonzero(s == POWER_TO_ZERO)
        if power.size:
            v[..., power] = self.f0[power] * (1.0 - t) ** self.g0[power]
        return v


def pick_shape(f0, f1, g0, g1, lf0, lf1, lg0, lg1):
    """Structure::shape_for: usable log cubic, usable linear cubic, fallback shape."""
    positive = (f0 > 0) & (f1 > 0)
    log_ok = positive & np.isfinite(lg0) & np.isfinite(lg1) & monotone(lf0, lf1, lg0, lg1)
    lin_ok = np.isfinite(g0) & np.isfinite(g1) & monotone(f0, f1, g0, g1)
    fallback = np.where(positive, LOG_LINEAR, LINEAR)
    return log_ok, lin_ok, positive, fallback


def curves_of(log_use, lin_use, positive, fallback, f0, f1, g0, g1, lf0, lf1, lg0, lg1):
    shape = np.where(log_use, LOG_HERMITE, np.where(lin_use, HERMITE, fallback))
    in_log = log_use | (~lin_use & positive)
    zero = np.zeros_like(f0)
    return Curves(np.where(in_log, lf0, f0), np.where(in_log, lf1, f1),
                  np.where(log_use, lg0, np.where(lin_use, g0, zero)),
                  np.where(log_use, lg1, np.where(lin_use, g1, zero)), shape)


def same_structure(r, m, P, rho):
    """The interpolating curves of m, P, rho on every interval of the table."""
    dm = 4 * np.pi * r * r * rho
    dP = np.where(r > 0, -G * m * rho / (r * r), 0.0)
    lnrho = np.where(rho > 0, np.log(rho), 0.0)
    lnP = np.where(P > 0, np.log(P), 0.0)
    dlnP = np.where(P > 0, dP / P, 0.0)
    dlnrho = log_density_slopes(r, rho, lnrho)
    r0, r1 = r[:-1], r[1:]
    h = r1 - r0

    mg0, mg1 = h * dm[:-1], h * dm[1:]
    mc = Curves(m[:-1], m[1:], mg0, mg1,
                np.where(monotone(m[:-1], m[1:], mg0, mg1), HERMITE, LINEAR))

    rho0, rho1 = rho[:-1], rho[1:]
    args = (rho0, rho1, h * rho0 * dlnrho[:-1], h * rho1 * dlnrho[1:],
            lnrho[:-1], lnrho[1:], h * dlnrho[:-1], h * dlnrho[1:])
    log_ok, lin_ok, positive, fallback = pick_shape(*args)
    rc = curves_of(log_ok, lin_ok & ~log_ok, positive, fallback, *args)
    # Density falling to zero at the outer row: a power law of the depth below r1, fitted to
    # the row below the interval.
    j = np.flatnonzero((rho1 == 0) & (rho0 > 0))
    j = j[j > 0]
    j = j[(r[j - 1] < r[j]) & (rho[j - 1] > rho[j])]
    if j.size:
        alpha = np.log(rho[j - 1] / rho[j]) / np.log((r[j + 1] - r[j - 1]) / (r[j + 1] - r[j]))
        ok = np.isfinite(alpha) & (alpha > 0) & (alpha <= 20)
        j, alpha = j[ok], alpha[ok]
        rc.f0[j], rc.f1[j], rc.g0[j], rc.g1[j] = rho[j], 0.0, alpha, 0.0
        rc.shape[j] = POWER_TO_ZERO

    P0, P1 = P[:-1], P[1:]
    args = (P0, P1, h * dP[:-1], h * dP[1:], lnP[:-1], lnP[1:], h * dlnP[:-1], h * dlnP[1:])
    log_ok, lin_ok, positive, fallback = pick_shape(*args)
    # Where both cubics are usable: the one closer to hydrostatic equilibrium at t = 1/2.
    both = np.flatnonzero(log_ok & lin_ok)
    use_log = log_ok.copy()
    if both.size:
        b = BASIS_MID
        i = both
        v_m = Curves(mc.f0[i], mc.f1[i], mc.g0[i], mc.g1[i], mc.shape[i]).value(0.5, b)
        v_rho = Curves(rc.f0[i], rc.f1[i], rc.g0[i], rc.g1[i], rc.shape[i]).value(0.5, b)
        lf0, lf1, lg0, lg1 = args[4][i], args[5][i], args[6][i], args[7][i]
        v_P = np.exp(b[0] * lf0 + b[1] * lg0 + b[2] * lf1 + b[3] * lg1)
        dP_log = v_P * (b[4] * lf0 + b[5] * lg0 + b[6] * lf1 + b[7] * lg1)
        dP_lin = b[4] * P0[i] + b[5] * args[2][i] + b[6] * P1[i] + b[7] * args[3][i]
        rm = 0.5 * (r0[i] + r1[i])
        target = np.where(rm > 0, -G * v_m * v_rho * h[i] / (rm * rm), 0.0)
        use_log[i] = np.abs(dP_log - target) <= np.abs(dP_lin - target)
    Pc = curves_of(use_log, lin_ok & ~use_log, positive, fallback, *args)
    return mc, Pc, rc


def same_pencil(r, m, P, rho, g1):
    """radmode's fine pencil: (x, K diagonal, K off-diagonal, M diagonal, M off-diagonal)."""
    if np.any(r[1:] == r[:-1]):
        raise ValueError("repeated radius (discontinuity): not handled by this baseline")
    if r[0] > 0:  # centre extension: uniform-density core of the innermost density
        r0, rho0 = r[0], rho[0]
        Pc = P[0] + (2.0 * np.pi / 3.0) * G * rho0 * rho0 * r0 * r0
        r, m, P = np.r_[0.0, r], np.r_[0.0, m], np.r_[Pc, P]
        rho, g1 = np.r_[rho0, rho], np.r_[g1[0], g1]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        mc, Pc, rc = same_structure(r, m, P, rho)
        t = GL3_T[:, None]
        mq, Pq, rhoq = mc.value(t, BASIS_Q), Pc.value(t, BASIS_Q), rc.value(t, BASIS_Q)
    gq = (1.0 - t) * g1[:-1] + t * g1[1:]
    M, R = m[-1], r[-1]
    inv_P, inv_rho, inv_M = 1.0 / (G * M * M / (R * R * R * R)), 1.0 / (M / (R * R * R)), 1.0 / M
    x = r / R
    x[-1] = 1.0
    xi, xr = x[:-1], x[1:]
    hx = xr - xi
    inv_h = 1.0 / hx
    inv_h2 = inv_h * inv_h
    # At the quadrature points, shape (3, intervals): the coefficients a/h^2, b/h, c, d and
    # the hat functions' products (ElementSums::add in src/discretize.cpp).
    xq = xi + t * hx
    w = GL3_W[:, None] * hx
    Pn, rhon, mn = Pq * inv_P, rhoq * inv_rho, mq * inv_M
    gp, x2 = gq * Pn, xq * xq
    a = gp * x2 * x2 * inv_h2
    b = 3.0 * gp * x2 * xq * inv_h
    c = 9.0 * gp * x2 - 4.0 * mn * rhon * xq
    d = rhon * x2 * x2
    pl = (xr - xq) * inv_h
    pr = 1.0 - pl
    kll = w * (a - 2.0 * b * pl + c * pl * pl)
    krr = w * (a + 2.0 * b * pr + c * pr * pr)
    klr = w * (-a + b * (pl - pr) + c * pl * pr)
    wd = w * d
    mll, mrr, mlr = wd * pl * pl, wd * pr * pr, wd * pl * pr
    # The three points of each interval summed in order, then scattered to the nodes.
    n = x.size
    kd, md = np.zeros(n), np.zeros(n)
    kd[:-1] = (kll[0] + kll[1]) + kll[2]
    kd[1:] += (krr[0] + krr[1]) + krr[2]
    md[:-1] = (mll[0] + mll[1]) + mll[2]
    md[1:] += (mrr[0] + mrr[1]) + mrr[2]
    ko = (klr[0] + klr[1]) + klr[2]
    mo = (mlr[0] + mlr[1]) + mlr[2]
    Ps = P[-1] * inv_P
    kd[-1] += -4.0 * Ps
    md[-1] += Ps
    return x, kd, ko, md, mo, G * M / (R * R * R)


def coarse_nodes(last):
    """Every other node of 0 .. last; an odd count of intervals starts with 0, 1."""
    return np.arange(0, last + 1, 2) if last % 2 == 0 else np.r_[0, np.arange(1, last + 1, 2)]


def restrict(x, kd, ko, md, mo):
    """Galerkin restriction of the tridiagonal pencil to every other node (coarse_nodes), in
    the formula of pencil_block.cpp's coarsen: (K diagonal, K off, M diagonal, M off)."""
    pos = coarse_nodes(x.size - 1)
    f, g = pos[:-1], pos[1:]
    mid = g == f + 2
    mm = np.minimum(f + 1, x.size - 1)
    xf, xm, xg = x[f], x[mm], x[g]
    wg = (xm - xf) / (xg - xf)
    wf = (xg - xm) / (xg - xf)
    t = 1.0 - wf
    out = []
    for dg, of in ((kd, ko), (md, mo)):
        dm_, of_f, of_m = dg[mm], of[f], of[np.minimum(mm, of.size - 1)]
        cd = dg[pos].copy()
        cd[1:] += np.where(mid, 2 * wg * of_m + wg * wg * dm_, 0.0)
        cd[:-1] += np.where(mid, 2 * wf * of_f + wf * wf * dm_, 0.0)
        co = np.where(mid, t * of_f + t * wf * dm_ + wf * of_m, of_f)
        out += [cd, co]
    return out


def solve_same(path, count):
    t = read_table(path)
    x, kd, ko, md, mo, unit = same_pencil(t["r"], t["m"], t["P"], t["rho"], t["Gamma1"])
    fine = lowest(tridiagonal(kd, ko), tridiagonal(md, mo), count) * unit
    ckd, cko, cmd, cmo = restrict(x, kd, ko, md, mo)
    coarse = lowest(tridiagonal(ckd, cko), tridiagonal(cmd, cmo), count) * unit
    omega2 = fine + (fine - coarse) / 3.0
    return 2.0 * np.pi / np.sqrt(omega2) / DAY_S  # periods [d]


BASELINES = {"same": solve_same, "simple": solve_simple}


def run_radmode(a, lst, out):
    """One `radmode track --jobs 1` over the list: (wall s, CPU s)."""
    c0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    rc = subprocess.run([a.radmode, "track", "--jobs", "1", "--quiet", "--count",
                         str(a.count), "--list", lst, "--output", out]).returncode
    wall = time.perf_counter() - t0
    c1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    if rc != 0:
        print("track_scipy: radmode track exited with", rc, file=sys.stderr)
    return wall, (c1.ru_utime + c1.ru_stime) - (c0.ru_utime + c0.ru_stime)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--radmode", required=True)
    ap.add_argument("--models", type=int, default=1000)
    ap.add_argument("--points", type=int, default=2000)
    ap.add_argument("--count", type=int, default=5)
    ap.add_argument("--baseline", choices=["same", "simple", "both"], default="same",
                    help="same: radmode's discretization (default); simple: the earlier "
                         "log-linear, two-point baseline; both: one after the other")
    ap.add_argument("--passes", type=int, default=10,
                    help="radmode runs the model list this many times in one `track` call per "
                         "round (default 10), its time divided by models x passes: about 20x "
                         "faster, one pass would be timed over a window 20x shorter than "
                         "SciPy's, where a burst of other load on a shared machine weighs 20x "
                         "more; with passes the two windows are of similar length")
    ap.add_argument("--chunks", type=int, default=10,
                    help="each round alternates between radmode and SciPy this many times, "
                         "each time on the next 1/chunks of the models (default 10), and sums "
                         "each side's times: both sample the machine's speed over the whole "
                         "round, instead of one after the other (on a shared machine it drifts "
                         "by tens of percent within minutes)")
    ap.add_argument("--repeat", type=int, default=1,
                    help="rounds of radmode then each baseline (default 1); each round's ratio "
                         "compares runs made one after the other, and with several rounds the "
                         "median and range of the rounds' ratios are printed (the speed of a "
                         "shared machine drifts between and within runs)")
    a = ap.parse_args()
    if a.repeat < 1:
        ap.error("--repeat: expected at least 1")
    if a.passes < 1:
        ap.error("--passes: expected at least 1")
    if not 1 <= a.chunks <= a.models:
        ap.error("--chunks: expected 1 to --models")
    names = ["same", "simple"] if a.baseline == "both" else [a.baseline]

    rounds = []  # per round: radmode (wall, cpu) and {baseline: (wall, cpu)}
    agreement = {}
    with tempfile.TemporaryDirectory(prefix="radmode-track-scipy-") as d:
        paths = []
        for i in range(a.models):
            f = i / max(a.models - 1, 1)
            p = os.path.join(d, "model%d.txt" % i)
            subprocess.run([a.radmode, "make", "polytrope", "--index", "3", "--points",
                            str(a.points), "--gamma1", repr(1.70 - 0.30 * f),
                            "--radius", repr(1.0 + 9.0 * f), "--output", p], check=True)
            paths.append(p)
        # The chunks: consecutive slices of the models, radmode's list of each repeated `passes`
        # times.
        bounds = [a.models * c // a.chunks for c in range(a.chunks + 1)]
        chunks = [paths[bounds[c]:bounds[c + 1]] for c in range(a.chunks)]
        lists = []
        for c, part in enumerate(chunks):
            lists.append(os.path.join(d, "list%d.txt" % c))
            with open(lists[-1], "w") as f:
                f.write("\n".join(part * a.passes) + "\n")
        out = os.path.join(d, "track.csv")

        for k in range(a.repeat):
            radmode_times = (0.0, 0.0)
            baseline_times = {name: (0.0, 0.0) for name in names}
            rows = []
            periods = {name: [] for name in names}
            for c, part in enumerate(chunks):
                wall, cpu = run_radmode(a, lists[c], out)
                radmode_times = (radmode_times[0] + wall, radmode_times[1] + cpu)
                if k == 0:
                    with open(out, newline="") as f:
                        table = list(csv.reader(l for l in f if not l.startswith("#")))
                    head = table[0]
                    rows += table[1:len(part) + 1] # (the first pass)
                for name in names:
                    solve = BASELINES[name]
                    t0, p0 = time.perf_counter(), time.process_time()
                    periods[name] += [solve(p, a.count) for p in part]
                    w0, c0 = baseline_times[name]
                    baseline_times[name] = (w0 + time.perf_counter() - t0,
                                            c0 + time.process_time() - p0)
            if k == 0:
                cols = [head.index("period_d_%d" % k) for k in range(a.count)]
            for name in names:
                if k == 0:
                    worst, compared = 0.0, 0
                    for row, ps in zip(rows, periods[name]):
                        for c, p in zip(cols, ps):
                            if row[c]:
                                worst = max(worst, abs(float(row[c]) / p - 1))
                                compared += 1
                    agreement[name] = (worst, compared)
            rounds.append((radmode_times, baseline_times))

    n = a.models
    print("models: %d polytropes n = 3, %d points, %d modes, one core; each round alternates %d "
          "times between radmode (each model %d times) and SciPy; times below per model list"
          % (n, a.points, a.count, a.chunks, a.passes))
    # radmode's times per pass (per list of n models), as SciPy's are
    rounds = [((t / a.passes, c / a.passes), b) for (t, c), b in rounds]
    for k, ((t_radmode, c_radmode), baseline_times) in enumerate(rounds):
        if a.repeat > 1:
            print("round %d:" % (k + 1))
        print("radmode track --jobs 1      : wall %.3f s = %.1f models/s; CPU %.3f s = %.1f "
              "models/CPU-s" % (t_radmode, n / t_radmode, c_radmode, n / c_radmode))
        for name in names:
            wall, cpu = baseline_times[name]
            print("NumPy/SciPy eigsh, %-6s baseline: wall %.3f s = %.1f models/s; CPU %.3f s = "
                  "%.1f models/CPU-s" % (name, wall, n / wall, cpu, n / cpu))
            print("  radmode / SciPy (%s) speed: %.1fx (wall), %.1fx (CPU time)"
                  % (name, wall / t_radmode, cpu / c_radmode))
    for name in names:
        worst, compared = agreement[name]
        print("largest relative period difference (%s): %.2e over %d periods"
              % (name, worst, compared))
        if a.repeat > 1:
            ratios = sorted(r[1][name][1] / r[0][1] for r in rounds)
            print("radmode / SciPy (%s), CPU time, %d rounds: median %.1fx, range %.1f-%.1fx"
                  % (name, a.repeat, statistics.median(ratios), ratios[0], ratios[-1]))
            best_radmode = min(r[0][1] for r in rounds)
            best_baseline = min(r[1][name][1] for r in rounds)
            print("  fastest round of each (CPU time): radmode %.1f, SciPy %.1f models/CPU-s: %.1fx"
                  % (n / best_radmode, n / best_baseline, best_baseline / best_radmode))


if __name__ == "__main__":
    main()
