#!/usr/bin/python3
"""SciPy solution of the same perturbation equations as src/perturb.c, for
the cost and agreement comparison of tests/bench/bench_perturb.c.

Reads DIR/perturb_coefficients.txt (the C medium coefficients on a grid of
500 nodes per e-fold) and interpolates them the same way as the C tables:
natural cubic splines of ln p, ln d, ln r, and of the smooth e and g (the C
code evaluates those two in closed form). Solves the fluctuating-sound-speed
system y = {delta_c, delta_c', delta_b, delta_b', delta_T} in x = ln a with
scipy.integrate.solve_ivp, implicit method 'BDF' with the analytic Jacobian,
at the C tolerances, from z_initial to z = 10 with the same 7 output
redshifts. Initial conditions: CDM on the Meszaros growing mode with smooth
baryons, 2F1(alpha, beta; 1; -y) from scipy.special.hyp2f1 (independent of
the C code's Pfaff-transformed GSL evaluation), baryons at rest.

Prints the cost per mode (median over the modes of DIR/perturb_reference.txt)
and the largest relative difference from the C results; writes the per-mode
cost to DIR/perturb_scipy_timing.txt.

Usage: /usr/bin/python3 tests/bench/scipy_perturb.py DIR
"""
import math
import sys
import time

import numpy as np
from scipy.integrate import solve_ivp
from scipy.interpolate import CubicSpline
from scipy.special import hyp2f1


def main():
    d = sys.argv[1] if len(sys.argv) > 1 else "."
    with open(f"{d}/perturb_coefficients.txt") as f:
        f.readline()
        words = f.readline().split()
    meta = {words[i]: float(words[i + 1]) for i in range(1, len(words) - 1, 2)}
    tab = np.loadtxt(f"{d}/perturb_coefficients.txt")
    ref = np.loadtxt(f"{d}/perturb_reference.txt")
    x = tab[:, 0]
    fb = tab[0, 3]
    fc = 1.0 - fb
    cols = np.column_stack([tab[:, 1], tab[:, 2], np.log(tab[:, 4]), np.log(tab[:, 5]),
                            np.log(tab[:, 6])])
    spl = CubicSpline(x, cols, bc_type="natural")

    # Meszaros growing mode with a smooth share f_b of the matter.
    x0 = -math.log1p(meta["z_initial"])
    y_eq = math.exp(x0) / meta["a_equality"]
    s = math.sqrt(0.25 + 6.0 * fc)
    al, be = 0.5 * (0.5 + s), 0.5 * (0.5 - s)
    D = hyp2f1(al, be, 1.0, -y_eq)
    dD = -al * be * hyp2f1(al + 1.0, be + 1.0, 2.0, -y_eq)
    slope = y_eq * dD / D

    def coeffs(xx):
        e, g, lp, ld, lr = spl(xx)
        return e, g, math.exp(lp), math.exp(ld), math.exp(lr)

    def make(k2):
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

    ks = np.unique(ref[:, 0])
    zs = np.unique(ref[:, 1])[::-1]          # descending redshift = ascending ln a
    xs = -np.log1p(zs)
    y0 = np.array([1.0, slope, 0.0, 0.0, 0.0])
    costs, worst_ratio, worst_dc = [], 0.0, 0.0
    for k in ks:
        fun, jac = make(k * k)
        t = time.perf_counter()
        sol = solve_ivp(fun, (x0, xs[-1]), y0, method="BDF", jac=jac, t_eval=xs,
                        rtol=meta["rel_tol"], atol=meta["abs_tol"])
        costs.append(time.perf_counter() - t)
        if not sol.success:
            print(f"k = {k}: solve_ivp failed: {sol.message}")
            return 1
        rows = ref[ref[:, 0] == k]
        for j, z in enumerate(zs):
            r = rows[rows[:, 1] == z][0]
            dc, boc = sol.y[0, j], sol.y[2, j] / sol.y[0, j]
            worst_dc = max(worst_dc, abs(dc / r[2] - 1.0))
            worst_ratio = max(worst_ratio, abs(boc / r[3] - 1.0))
    per_mode = float(np.median(costs))
    print(f"SciPy {np.__version__ and __import__('scipy').__version__} solve_ivp BDF + analytic "
          f"Jacobian, rtol {meta['rel_tol']:g}, atol {meta['abs_tol']:g}")
    print(f"{len(ks)} modes, k = {ks[0]:g}..{ks[-1]:g} /Mpc: median {1e3 * per_mode:.1f} ms per "
          f"mode (min {1e3 * min(costs):.1f}, max {1e3 * max(costs):.1f})")
    print(f"largest relative difference from the C solver: delta_b/delta_c {worst_ratio:.2e}, "
          f"delta_c {worst_dc:.2e}")
    with open(f"{d}/perturb_scipy_timing.txt", "w") as f:
        f.write(f"{per_mode:.9e}\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
