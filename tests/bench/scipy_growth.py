#!/usr/bin/python3
"""Whole-process comparison of `jeansgrow growth` with SciPy on the same work.

The program: `PROGRAM growth PARAMS` with 64 wavenumbers log-spaced from 1 to
5000 /Mpc (perturbations.k_values) and 7 output redshifts (1000 ... 10), run
as a subprocess and timed from start to exit (wall time, best of --runs;
parameter reading, thermal history, coefficient tables, the k -> 0
reference, the 64 modes and writing the table all included; the CPU time
of the best run is printed beside it; the same with one mode gives the fixed
cost and the cost of each further mode).

SciPy: the same equations (tests/bench/scipy_equations.py: the default
model, fluctuating sound speed with the ionisation-fraction perturbation
delta_xe, with the coefficient table of PARAMS written by
`bench_perturb --coefficients`) for the same 64 k and 7 z with LSODA and the
analytic Jacobian, through scipy.integrate.odeint (ODEPACK's own driver,
which takes the same steps as solve_ivp's LSODA with ~40 % less Python per
step; --method LSODA for solve_ivp's, --method BDF for its BDF). Only the
integrations are timed (not the start-up of Python, the coefficient table
or the splines): the sum over the 64 modes, best of --repeats, over a
ladder of tolerances (abs_tol = rel_tol / 100).

Accuracy: the largest relative error in delta_b/delta_c (and in delta_c)
over the 64 x 7 values against a tight reference, the program on its GSL
path (msbdf+rk8pd) at rel_tol 1e-12, abs_tol 1e-14; SciPy with the same
method at rel_tol 1e-12 cross-checks that reference (the difference says how
closely the two sides solve the same equations). The matched-accuracy
ratio divides SciPy's cost at the loosest rung whose delta_b/delta_c error
is <= 1e-6 by the program's whole-process time (wall; CPU time beside it); the program's own error
against the same reference is printed beside it. Nothing here asserts a
time.

--check (a CTest entry, a few seconds): two modes, the program against SciPy
at tight tolerances on both sides; fails if delta_b/delta_c or delta_c
differ by more than CHECK_LIMIT anywhere, i.e. if the SciPy equations stop
being the program's.

NumPy's OpenBLAS reads OPENBLAS_CORETYPE / OPENBLAS_L2_SIZE; unset them for
the benchmark (the first line says whether they were set):
  env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE /usr/bin/python3 \\
      tests/bench/scipy_growth.py [PROGRAM]

Usage: /usr/bin/python3 tests/bench/scipy_growth.py [PROGRAM] [--bench BENCH_PERTURB]
           [--params FILE] [--runs N] [--repeats N] [--method odeint|LSODA|BDF]
           [--check]
"""
import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time

import numpy as np
import scipy
from scipy.integrate import odeint, solve_ivp

from scipy_equations import Coefficients

SOURCE = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
WAVENUMBERS = np.geomspace(1.0, 5000.0, 64)
REDSHIFTS = (1000.0, 500.0, 200.0, 100.0, 50.0, 20.0, 10.0)
LADDER = (1e-5, 3e-6, 1e-6, 3e-7, 1e-7, 3e-8, 1e-8, 3e-9)
ABS_PER_REL = 1e-2
REF_RTOL = 1e-12
TARGET = 1e-6
# odeint's first step in ln a, and its end (tcrit). Left to odeint (h0 = 0,
# no tcrit), SciPy 1.10's LSODA reads work-array entries it never set: the
# results then depend on the calls before and on MALLOC_PERTURB_ (3.3e-6 or
# 2.9e-6 in delta_b/delta_c at rel_tol 3e-7; measured); with both given
# what remains is ~1e-10 from one call to another. 1e-6 is the first trial step of the program's GSL path; the
# cost is that of odeint's own choice (measured, to within the noise, at
# rel_tol 1e-6 to 1e-8).
ODEINT_FIRST_STEP = 1e-6
# The reference: the program's GSL path (the library's cross-check path),
# independent of the default stepper being timed.
REFERENCE_SETTINGS = ('perturbations.stepper="msbdf+rk8pd"', f"perturbations.rel_tol={REF_RTOL!r}",
                      f"perturbations.abs_tol={REF_RTOL * ABS_PER_REL!r}")
# --check: k at both ends of the range (the pressure-free and the most
# pressure-dominated mode), both sides tight (the program at rel_tol 1e-10,
# SciPy at 1e-10): they agree to ~1e-9 when the equations are the same
# (measured); a missing or changed coefficient moves delta_b/delta_c by
# 1e-4 and more (delta_xe alone by 5e-2). 1e-7 leaves a factor 100 for the
# two solvers' errors and the re-interpolated coefficient table.
CHECK_WAVENUMBERS = (1.0, 5000.0)
CHECK_RTOL = 1e-10
CHECK_LIMIT = 1e-7


def libconfig_list(values):
    return "[" + ", ".join(repr(float(v)) for v in values) + "]"


def run_program(program, params, ks, settings, out):
    """One run of `program growth`: (wall seconds, CPU seconds of the child)."""
    cmd = [program, "growth", params, "--set", f"perturbations.k_values={libconfig_list(ks)}",
           "--set", f"output.redshifts={libconfig_list(REDSHIFTS)}", "-o", out]
    for s in settings:
        cmd += ["--set", s]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    done = subprocess.run(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                          stderr=subprocess.PIPE, text=True)
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)}: exit {done.returncode}: {done.stderr.strip()}")
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def read_growth(path, ks):
    """delta_c and b_over_c as [z, k] arrays from the program's growth table."""
    with open(path) as f:
        names = [line for line in f if line.startswith("#")][-1].lstrip("#").split()
    rows = np.atleast_2d(np.loadtxt(path))
    col = {name: i for i, name in enumerate(names)}
    shape = (len(REDSHIFTS), len(ks))
    z = rows[:, col["z"]].reshape(shape)
    k = rows[:, col["k[1/Mpc]"]].reshape(shape)
    if np.any(np.abs(z[:, 0] / np.array(REDSHIFTS) - 1.0) > 1e-9) or \
            np.any(np.abs(k / ks[np.newaxis, :] - 1.0) > 1e-9):
        raise SystemExit(f"{path}: rows are not the requested redshifts and wavenumbers in order")
    return rows[:, col["delta_c"]].reshape(shape), rows[:, col["b_over_c"]].reshape(shape)


def errors(delta_c, b_over_c, ref):
    return (float(np.max(np.abs(b_over_c / ref[1] - 1.0))),
            float(np.max(np.abs(delta_c / ref[0] - 1.0))))


METHOD_NAMES = {"odeint": "LSODA through scipy.integrate.odeint",
                "LSODA": "LSODA through scipy.integrate.solve_ivp",
                "BDF": "BDF through scipy.integrate.solve_ivp"}


def solve_modes(medium, ks, method, rtol):
    """SciPy on every k: (wall seconds per mode, CPU seconds per mode,
    delta_c, b_over_c); only the integrations are timed."""
    x0, y0 = medium.initial_state()
    xs = -np.log1p(np.array(REDSHIFTS))
    wall, cpu = np.empty(len(ks)), np.empty(len(ks))
    delta_c = np.empty((len(REDSHIFTS), len(ks)))
    b_over_c = np.empty_like(delta_c)
    for j, k in enumerate(ks):
        fun, jac = medium.system(float(k))
        t, c = time.perf_counter(), time.process_time()
        if method == "odeint":
            y, info = odeint(fun, y0, np.concatenate(([x0], xs)), Dfun=jac, tfirst=True,
                             rtol=rtol, atol=rtol * ABS_PER_REL, mxstep=10**7, full_output=True,
                             h0=ODEINT_FIRST_STEP, tcrit=xs[-1:])
            ok, message, y = info["message"] == "Integration successful.", info["message"], y[1:].T
        else:
            sol = solve_ivp(fun, (x0, xs[-1]), y0, method=method, jac=jac, t_eval=xs, rtol=rtol,
                            atol=rtol * ABS_PER_REL)
            ok, message, y = sol.success, sol.message, sol.y
        wall[j], cpu[j] = time.perf_counter() - t, time.process_time() - c
        if not ok:
            raise SystemExit(f"k = {k:g}: {METHOD_NAMES[method]} failed at rel_tol {rtol:g}: "
                             f"{message}")
        delta_c[:, j] = y[0]
        b_over_c[:, j] = y[2] / y[0]
    return wall, cpu, delta_c, b_over_c


def coefficient_table(bench, params, directory):
    done = subprocess.run([bench, "--coefficients", params, directory], stdin=subprocess.DEVNULL,
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    if done.returncode != 0:
        raise SystemExit(f"{bench} --coefficients {params}: {done.stderr.strip()}")
    return Coefficients(directory)


def check(opt, medium, work):
    ks = np.array(CHECK_WAVENUMBERS)
    out = os.path.join(work, "check.txt")
    run_program(opt.program, opt.params, ks, (f"perturbations.rel_tol={CHECK_RTOL!r}",
                                              f"perturbations.abs_tol={CHECK_RTOL * ABS_PER_REL!r}"),
                out)
    program = read_growth(out, ks)
    _, _, delta_c, b_over_c = solve_modes(medium, ks, opt.method, CHECK_RTOL)
    e_bc, e_dc = errors(delta_c, b_over_c, program)
    print(f"SciPy ({METHOD_NAMES[opt.method]}) and the program, both at rel_tol {CHECK_RTOL:g}, k = "
          f"{', '.join(f'{k:g}' for k in ks)} /Mpc, z = {REDSHIFTS[0]:g}..{REDSHIFTS[-1]:g}: "
          f"largest difference delta_b/delta_c {e_bc:.1e}, delta_c {e_dc:.1e} "
          f"(limit {CHECK_LIMIT:g})")
    return 0 if e_bc <= CHECK_LIMIT and e_dc <= CHECK_LIMIT else 1


def benchmark(opt, medium, work):
    ks = WAVENUMBERS
    n = len(ks)
    out = os.path.join(work, "growth.txt")
    env = ", ".join(f"{v}={os.environ[v]}" for v in ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE")
                    if v in os.environ) or "OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE unset"
    print(f"Python {sys.version.split()[0]}, NumPy {np.__version__}, SciPy {scipy.__version__}; "
          f"{env}; load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    print(f"work: {n} modes k = {ks[0]:g}..{ks[-1]:g} /Mpc (log-spaced), {len(REDSHIFTS)} "
          f"redshifts {REDSHIFTS[0]:g}..{REDSHIFTS[-1]:g}; {opt.params}")

    run_program(opt.program, opt.params, ks, REFERENCE_SETTINGS, out)
    ref = read_growth(out, ks)
    runs = [run_program(opt.program, opt.params, ks, (), out) for _ in range(opt.runs)]
    wall, cpu = min(runs)
    own = errors(*read_growth(out, ks), ref)
    one_wall, one_cpu = min(run_program(opt.program, opt.params, ks[:1], (), out)
                            for _ in range(opt.runs))
    print(f"\nprogram {opt.program} growth, whole process, best of {opt.runs} runs: "
          f"{1e3 * wall:.1f} ms wall ({1e3 * cpu:.1f} ms CPU), {1e3 * wall / n:.3f} ms per mode; "
          f"error delta_b/delta_c {own[0]:.1e}, delta_c {own[1]:.1e}")
    print(f"  the same with one mode: {1e3 * one_wall:.1f} ms wall ({1e3 * one_cpu:.1f} ms CPU): "
          f"start-up, history, coefficient tables, k -> 0 reference; each further mode "
          f"{1e3 * (wall - one_wall) / (n - 1):.3f} ms wall "
          f"({1e3 * (cpu - one_cpu) / (n - 1):.3f} ms CPU)")
    print(f"reference: the program, GSL msbdf+rk8pd at rel_tol {REF_RTOL:g}, abs_tol "
          f"{REF_RTOL * ABS_PER_REL:g}")
    seconds, _, delta_c, b_over_c = solve_modes(medium, ks, opt.method, REF_RTOL)
    cross = errors(delta_c, b_over_c, ref)
    print(f"reference cross-check: SciPy at rel_tol {REF_RTOL:g}: largest difference "
          f"delta_b/delta_c {cross[0]:.1e}, delta_c {cross[1]:.1e} "
          f"({1e3 * seconds.sum() / n:.0f} ms/mode)")

    print(f"\nSciPy, {METHOD_NAMES[opt.method]} with the analytic Jacobian, integration only, "
          f"best of {opt.repeats} runs of the {n} modes; abs_tol = rel_tol/100; ms per mode: "
          f"mean (CPU), fastest and slowest mode")
    print(f"{'rel_tol':>8} {'err b/c':>9} {'err d_c':>9} {'ms/mode':>9} {'(CPU)':>9} "
          f"{'fastest':>9} {'slowest':>9} {'total s':>8}")
    rows = []
    for rtol in LADDER:
        best = None
        for _ in range(opt.repeats):
            w, c, dc, bc = solve_modes(medium, ks, opt.method, rtol)
            if best is None or w.sum() < best[0].sum():
                best = w, c
        w, c = best
        e = errors(dc, bc, ref)
        rows.append((rtol, e[0], e[1], w.sum(), c.sum()))
        print(f"{rtol:8.0e} {e[0]:9.2e} {e[1]:9.2e} {1e3 * w.mean():9.2f} {1e3 * c.mean():9.2f} "
              f"{1e3 * w.min():9.2f} {1e3 * w.max():9.2f} {w.sum():8.3f}", flush=True)

    def matched(limit, what):
        ok = [r for r in rows if r[1] <= limit]
        if not ok:
            print(f"{what}: SciPy reaches delta_b/delta_c error <= {limit:.1e} on no rung")
            return
        # The loosest rung that reaches it, not the cheapest time measured:
        # the cost grows with the tolerance, and a run disturbed by other
        # work should not move the choice.
        rtol, e_bc, _, w, c = max(ok, key=lambda r: r[0])
        print(f"{what}: SciPy {w:.3f} s ({1e3 * w / n:.2f} ms/mode, rel_tol {rtol:g}, error "
              f"{e_bc:.1e}); program {1e3 * wall:.1f} ms whole process (error {own[0]:.1e}): "
              f"ratio {w / wall:.0f} (CPU time: {c / cpu:.0f})")
    print()
    matched(TARGET, f"matched accuracy, delta_b/delta_c error <= {TARGET:g}")
    matched(own[0], "at the program's own accuracy")
    return 0


def main():
    ap = argparse.ArgumentParser(description="jeansgrow growth against SciPy, whole process")
    ap.add_argument("program", nargs="?", default=os.path.join(SOURCE, "build", "jeansgrow"))
    ap.add_argument("--bench", default=os.path.join(SOURCE, "build", "tests", "bench",
                                                     "bench_perturb"),
                    help="bench_perturb, which writes the coefficient table")
    ap.add_argument("--params", default=os.path.join(SOURCE, "params", "reference.cfg"))
    ap.add_argument("--runs", type=int, default=7, help="program runs (the best is kept)")
    ap.add_argument("--repeats", type=int, default=3, help="SciPy runs per tolerance")
    ap.add_argument("--method", choices=tuple(METHOD_NAMES), default="odeint",
                    help="odeint: LSODA through odeint (the default); LSODA, BDF: solve_ivp")
    ap.add_argument("--check", action="store_true", help="the quick agreement check only")
    opt = ap.parse_args()
    opt.runs, opt.repeats = max(1, opt.runs), max(1, opt.repeats)
    with tempfile.TemporaryDirectory(prefix="scipy_growth.") as work:
        medium = coefficient_table(opt.bench, opt.params, work)
        return check(opt, medium, work) if opt.check else benchmark(opt, medium, work)


if __name__ == "__main__":
    sys.exit(main())
