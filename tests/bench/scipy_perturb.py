#!/usr/bin/python3
"""SciPy solution of the same perturbation equations as src/perturbations/perturb.c, for
the same-work comparison of tests/bench/bench_perturb.c.

The equations, their coefficients (DIR/perturb_coefficients.txt) and the
start are those of tests/bench/scipy_equations.py: the default model, the
fluctuating sound speed with delta_xe. Solved in x = ln a with
scipy.integrate.solve_ivp, implicit method 'BDF' with the analytic Jacobian
(or 'LSODA' with --method LSODA), from z_initial to z = 10 with the same 7
output redshifts and the same 16 modes as DIR/perturb_reference.txt.

A careful SciPy solution: the right-hand side and the Jacobian evaluate the
spline with plain Python arithmetic on the spline's per-interval polynomials
(checked against CubicSpline). What remains is the cost of solve_ivp's own
step.

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
import os
import sys
import time

import numpy as np
import scipy
from scipy.integrate import solve_ivp

from scipy_equations import Coefficients

REF_RTOL = 1e-12
ABS_PER_REL = 1e-2


def load_results(d):
    ref = np.loadtxt(f"{d}/perturb_reference.txt")
    ladder = np.atleast_2d(np.loadtxt(f"{d}/perturb_c_ladder.txt"))
    return ref, ladder


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

    medium = Coefficients(d)
    ref, c_ladder = load_results(d)
    x0, y0 = medium.initial_state()

    ks = np.unique(ref[:, 0])
    zs = np.unique(ref[:, 1])[::-1]  # descending redshift = ascending ln a
    xs = -np.log1p(zs)
    # ref rows per mode, in the order of zs
    ref_of = {k: np.array([ref[(ref[:, 0] == k) & (ref[:, 1] == z)][0] for z in zs]) for k in ks}
    systems = {k: medium.system(k) for k in ks}

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
