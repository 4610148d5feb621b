#!/usr/bin/python3
"""SciPy solution of the same perturbation equations as src/perturbations/perturb.c, for
the same-work comparison of tests/bench/bench_perturb.c.

Reads DIR/perturb_coefficients.txt (the C medium coefficients on a grid of
500 nodes per e-fold) and interpolates them the same way as the C tables:
natural cubic splines of ln p, ln d, ln r, and of e and g. Solves the
fluctuating-sound-speed system y = {delta_c, delta_c', delta_b, delta_b',
delta_T} in x = ln a with scipy.integrate.solve_ivp, implicit method 'BDF'
with the analytic Jacobian (or 'LSODA' with --method LSODA), from z_initial to z = 10 with the same 7 output
redshifts and the same 16 modes as DIR/perturb_reference.txt. Initial
conditions: CDM on the Meszaros growing mode with smooth baryons,
2F1(alpha, beta; 1; -y) from scipy.special.hyp2f1 (independent of the C
code's Pfaff-transformed GSL evaluation), baryons at rest.

A careful SciPy solution: the right-hand side and the Jacobian evaluate the
spline with plain Python arithmetic on the spline's per-interval polynomials
(CubicSpline.__call__ costs several microseconds of array handling per
scalar call), checked against CubicSpline itself below. What remains is the
cost of solve_ivp's own step.

Equal nominal tolerances are not equal accuracy, so the script runs the
tolerance ladder of DIR/perturb_c_ladder.txt (abs_tol = rel_tol / 100) and
measures the largest relative error in delta_b/delta_c and delta_c over the
modes and redshifts against DIR/perturb_reference.txt (the C solver at
rel_tol 1e-12). It first cross-checks that reference with SciPy's Radau at
rel_tol 1e-12 (skip with --no-radau: it takes about a second per mode).
Costs are per mode, the best of --repeats runs of all modes. Writes
DIR/perturb_scipy_ladder.txt; bench_perturb DIR then prints both ladders and
the ratios.

NumPy's OpenBLAS reads OPENBLAS_CORETYPE / OPENBLAS_L2_SIZE; the line
printed first says whether they were set. The benchmark command unsets them
for this script alone:
  env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE /usr/bin/python3 \\
      tests/bench/scipy_perturb.py DIR

Usage: /usr/bin/python3 tests/bench/scipy_perturb.py DIR [--repeats N] [--no-radau]
                                                     [--method BDF|LSODA]
"""
import argparse
import math
import os
import sys
import time

import numpy as np
import scipy
from scipy.integrate import solve_ivp
from scipy.interpolate import CubicSpline
from scipy.special import hyp2f1

REF_RTOL = 1e-12
ABS_PER_REL = 1e-2


def load(d):
    with open(f"{d}/perturb_coefficients.txt") as f:
        f.readline()
        words = f.readline().split()
    meta = {words[i]: float(words[i + 1]) for i in range(1, len(words) - 1, 2)}
    tab = np.loadtxt(f"{d}/perturb_coefficients.txt")
    ref = np.loadtxt(f"{d}/perturb_reference.txt")
    ladder = np.atleast_2d(np.loadtxt(f"{d}/perturb_c_ladder.txt"))
    return meta, tab, ref, ladder


def make_coefficients(tab):
    """Scalar evaluation of the natural cubic splines of e, g, ln p, ln d,
    ln r on the (uniform) table grid: one index computation and five Horner
    sums in Python floats."""
    x = tab[:, 0]
    cols = np.column_stack([tab[:, 1], tab[:, 2], np.log(tab[:, 4]), np.log(tab[:, 5]),
                            np.log(tab[:, 6])])
    spl = CubicSpline(x, cols, bc_type="natural")
    # spl.c[m, i, q]: coefficient of (x - x_i)^(3 - m) on interval i.
    poly = [tuple(float(v) for v in spl.c[:, i, :].T.ravel()) for i in range(len(x) - 1)]
    xb = [float(v) for v in x]
    x0, inv_h, last = xb[0], (len(x) - 1) / (xb[-1] - xb[0]), len(x) - 2
    exp = math.exp

    def coeffs(xx):
        i = int((xx - x0) * inv_h)
        i = 0 if i < 0 else (last if i > last else i)
        t = xx - xb[i]
        c = poly[i]
        e = ((c[0] * t + c[1]) * t + c[2]) * t + c[3]
        g = ((c[4] * t + c[5]) * t + c[6]) * t + c[7]
        lp = ((c[8] * t + c[9]) * t + c[10]) * t + c[11]
        ld = ((c[12] * t + c[13]) * t + c[14]) * t + c[15]
        lr = ((c[16] * t + c[17]) * t + c[18]) * t + c[19]
        return e, g, exp(lp), exp(ld), exp(lr)

    # The fast path must be the same interpolant as CubicSpline.
    for xx in np.linspace(x[0], x[-1], 1001):
        e, g, lp, ld, lr = spl(xx)
        fast = coeffs(float(xx))
        want = (e, g, math.exp(lp), math.exp(ld), math.exp(lr))
        for a, b in zip(fast, want):
            if abs(a - b) > 1e-12 * abs(b):
                raise SystemExit(f"spline evaluation differs at x = {xx}: {fast} vs {want}")
    return coeffs


def make_system(coeffs, fb, k2):
    fc = 1.0 - fb

    def fun(xx, y):
        e, g, p, dr, r = coeffs(xx)
        grav = g * (fc * y[0] + fb * y[2])
        return np.array([
            y[1],
            -(2.0 + e) * y[1] + grav,
            y[3],
            -(2.0 + e + dr) * y[3] + grav - p * k2 * (y[2] + y[4]),
            (2.0 / 3.0) * y[3] - r * y[4],
        ])

    def jac(xx, y):
        e, g, p, dr, r = coeffs(xx)
        pk2 = p * k2
        return np.array([
            [0.0, 1.0, 0.0, 0.0, 0.0],
            [g * fc, -(2.0 + e), g * fb, 0.0, 0.0],
            [0.0, 0.0, 0.0, 1.0, 0.0],
            [g * fc, 0.0, g * fb - pk2, -(2.0 + e + dr), -pk2],
            [0.0, 0.0, 0.0, 2.0 / 3.0, -r],
        ])
    return fun, jac


def main():
    ap = argparse.ArgumentParser(description="SciPy side of bench_perturb")
    ap.add_argument("dir", nargs="?", default=".")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--no-radau", action="store_true")
    ap.add_argument("--method", choices=("BDF", "LSODA"), default="BDF",
                    help="solve_ivp method of the ladder (both with the analytic Jacobian)")
    opt = ap.parse_args()
    d, repeats, radau = opt.dir, max(1, opt.repeats), not opt.no_radau
    env = ", ".join(f"{v}={os.environ[v]}" for v in ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE")
                    if v in os.environ) or "OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE unset"
    print(f"Python {sys.version.split()[0]}, NumPy {np.__version__}, SciPy {scipy.__version__}; "
          f"{env}")

    meta, tab, ref, c_ladder = load(d)
    fb = float(tab[0, 3])
    coeffs = make_coefficients(tab)

    # Meszaros growing mode with a smooth share f_b of the matter.
    x0 = -math.log1p(meta["z_initial"])
    y_eq = math.exp(x0) / meta["a_equality"]
    s = math.sqrt(0.25 + 6.0 * (1.0 - fb))
    al, be = 0.5 * (0.5 + s), 0.5 * (0.5 - s)
    D = hyp2f1(al, be, 1.0, -y_eq)
    dD = -al * be * hyp2f1(al + 1.0, be + 1.0, 2.0, -y_eq)
    y0 = np.array([1.0, y_eq * dD / D, 0.0, 0.0, 0.0])

    ks = np.unique(ref[:, 0])
    zs = np.unique(ref[:, 1])[::-1]  # descending redshift = ascending ln a
    xs = -np.log1p(zs)
    # ref rows per mode, in the order of zs
    ref_of = {k: np.array([ref[(ref[:, 0] == k) & (ref[:, 1] == z)][0] for z in zs]) for k in ks}
    systems = {k: make_system(coeffs, fb, k * k) for k in ks}

    def solve_all(method, rtol):
        """All modes once: (seconds, worst b/c error, worst delta_c error, evaluations)."""
        t_total, e_ratio, e_dc, evals = 0.0, 0.0, 0.0, 0
        for k in ks:
            fun, jac = systems[k]
            t = time.perf_counter()
            sol = solve_ivp(fun, (x0, xs[-1]), y0, method=method, jac=jac, t_eval=xs,
                            rtol=rtol, atol=rtol * ABS_PER_REL)
            t_total += time.perf_counter() - t
            if not sol.success:
                raise SystemExit(f"k = {k}: solve_ivp {method} failed: {sol.message}")
            r = ref_of[k]
            e_ratio = max(e_ratio, float(np.max(np.abs(sol.y[2] / sol.y[0] / r[:, 3] - 1.0))))
            e_dc = max(e_dc, float(np.max(np.abs(sol.y[0] / r[:, 2] - 1.0))))
            evals += sol.nfev + sol.njev
        return t_total, e_ratio, e_dc, evals

    radau_line = ""
    if radau:
        t, er, ec, _ = solve_all("Radau", REF_RTOL)
        print(f"reference cross-check: SciPy Radau at rel_tol {REF_RTOL:g} against the C solver "
              f"at rel_tol {REF_RTOL:g}: largest difference delta_b/delta_c {er:.1e}, delta_c "
              f"{ec:.1e} ({1e3 * t / len(ks):.0f} ms/mode)")
        radau_line = f"# radau {er:.6e} {ec:.6e}\n"

    method = opt.method
    print(f"solve_ivp {method} + analytic Jacobian, {len(ks)} modes k = {ks[0]:g}..{ks[-1]:g} /Mpc, "
          f"{len(zs)} redshifts; cost: best of {repeats} runs, per mode")
    print(f"{'rel_tol':>8} {'err b/c':>9} {'err d_c':>9} {'ms/mode':>9} {'f+J evals':>9}")
    rows = []
    for rtol in c_ladder[:, 0]:
        best = None
        for _ in range(repeats):
            t, er, ec, ev = solve_all(method, float(rtol))
            best = t if best is None else min(best, t)
        ms = 1e3 * best / len(ks)
        rows.append((rtol, rtol * ABS_PER_REL, er, ec, ms, ev / len(ks)))
        print(f"{rtol:8.0e} {er:9.2e} {ec:9.2e} {ms:9.1f} {ev / len(ks):9.0f}", flush=True)

    with open(f"{d}/perturb_scipy_ladder.txt", "w") as f:
        f.write(f"# scipy solve_ivp {method}, analytic Jacobian, best of {repeats} runs; "
                f"Python {sys.version.split()[0]}, "
                f"NumPy {np.__version__}, SciPy {scipy.__version__}; {env}\n")
        f.write(radau_line)
        f.write("# rel_tol\tabs_tol\terr_b_over_c\terr_delta_c\tms_per_mode\tevals_per_mode\n")
        for r in rows:
            f.write("%.3g\t%.3g\t%.6e\t%.6e\t%.6f\t%.1f\n" % r)
    print(f"wrote {d}/perturb_scipy_ladder.txt; run bench_perturb {d} again for the comparison")
    return 0


if __name__ == "__main__":
    sys.exit(main())
