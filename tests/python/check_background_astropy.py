#!/usr/bin/python3
"""Compare the jeansgrow background with Astropy's cosmology module.

Usage: /usr/bin/python3 tests/python/check_background_astropy.py PATH_TO_background_dump

Reference: Astropy (Debian 12 python3-astropy 5.2.1), classes FlatLambdaCDM,
LambdaCDM and w0waCDM, given the same radiation content: Tcmb0, Neff and
m_nu = 0 (massless neutrinos, as in jeansgrow). Astropy's Om0 = (ob + oc)/h^2
excludes radiation and its closure Ode0 = 1 - Om0 - Ogamma0 - Onu0 - Ok0 is
ours, so the two Friedmann equations are the same function; both take their
constants from CODATA 2018 / IAU 2015.

Tolerance 1e-4 relative: the agreement the README promises, far above the two quadratures'
accuracies (jeansgrow 1e-8, Astropy's scipy.integrate.quad default ~1.5e-8),
so a failure means different physics (radiation, closure, CPL form,
curvature), not rounding. The worst differences are printed so that the
actual agreement is on record. The largest, ~5e-7 on the age at z = 1100, is
Astropy's: its age integral runs scipy quad with the default absolute
tolerance 1.5e-8 on a value of 2.6e-5 (in units of 1/H0); a quadrature at
1e-13 agrees with jeansgrow to 6e-12 there.

One line per check; exit status 1 if any check fails, 2 on usage errors.
"""

import subprocess
import sys

import astropy.units as u
from astropy.cosmology import FlatLambdaCDM, LambdaCDM, w0waCDM

RTOL = 1e-4
REDSHIFTS = [0.0, 0.1, 0.5, 1.0, 2.0, 5.0, 10.0, 50.0, 200.0, 1100.0]

# (name, h, omega_b h^2, omega_c h^2, Omega_k, T_cmb [K], N_eff, w0, wa)
# Planck 2018 TT,TE,EE+lowE+lensing (Planck Collaboration 2020, A&A 641, A6,
# Table 2), with N_eff = 3.046 massless instead of the paper's one massive
# neutrino: the comparison is of the code, not of the paper's derived values.
CASES = [
    ("planck2018_flat", 0.6736, 0.02237, 0.1200, 0.0, 2.7255, 3.046, -1.0, 0.0),
    ("open_omega_k_0.05", 0.6736, 0.02237, 0.1200, 0.05, 2.7255, 3.046, -1.0, 0.0),
    ("closed_omega_k_-0.05", 0.6736, 0.02237, 0.1200, -0.05, 2.7255, 3.046, -1.0, 0.0),
    ("cpl_w0_-0.9_wa_0.2", 0.6736, 0.02237, 0.1200, 0.0, 2.7255, 3.046, -0.9, 0.2),
]


def astropy_model(h, obh2, och2, omega_k, tcmb, neff, w0, wa):
    common = dict(H0=100.0 * h, Om0=(obh2 + och2) / h**2, Tcmb0=tcmb * u.K,
                  Neff=neff, m_nu=0.0 * u.eV, Ob0=obh2 / h**2)
    flat = FlatLambdaCDM(**common)
    if omega_k == 0.0 and w0 == -1.0 and wa == 0.0:
        return flat
    # Same radiation as the flat model; Ode0 from our closure with curvature.
    ode0 = 1.0 - flat.Om0 - flat.Ogamma0 - flat.Onu0 - omega_k
    if w0 == -1.0 and wa == 0.0:
        return LambdaCDM(Ode0=ode0, **common)
    return w0waCDM(Ode0=ode0, w0=w0, wa=wa, **common)


def run_dump(exe, case):
    args = [exe] + [repr(v) for v in case[1:]] + [repr(z) for z in REDSHIFTS]
    out = subprocess.run(args, capture_output=True, text=True)
    if out.returncode != 0:
        raise RuntimeError(f"{' '.join(args)} failed ({out.returncode}): {out.stderr.strip()}")
    rows = []
    for line in out.stdout.splitlines():
        if line.startswith("#") or not line.strip():
            continue
        rows.append([float(x) for x in line.split("\t")])
    if len(rows) != len(REDSHIFTS):
        raise RuntimeError(f"expected {len(REDSHIFTS)} rows, got {len(rows)}")
    return rows


def rel(a, b):
    if b == 0.0:
        return abs(a)
    return abs(a - b) / abs(b)


def main():
    if len(sys.argv) != 2:
        print(__doc__.strip().splitlines()[2], file=sys.stderr)
        return 2
    exe = sys.argv[1]
    failures = 0
    worst = {}
    for case in CASES:
        name = case[0]
        model = astropy_model(*case[1:])
        try:
            rows = run_dump(exe, case)
        except (RuntimeError, OSError) as e:
            print(f"FAIL {name}: {e}")
            failures += 1
            continue
        for (z, hz, age, dc, dm), zref in zip(rows, REDSHIFTS):
            if z != zref:
                print(f"FAIL {name}: row for z = {z} where z = {zref} was asked")
                failures += 1
                continue
            ref = {
                "H[km/s/Mpc]": model.H(z).to_value(u.km / u.s / u.Mpc),
                "age[Gyr]": model.age(z).to_value(u.Gyr),
                "comoving_distance[Mpc]": model.comoving_distance(z).to_value(u.Mpc),
                "transverse_distance[Mpc]": model.comoving_transverse_distance(z).to_value(u.Mpc),
            }
            ours = {"H[km/s/Mpc]": hz, "age[Gyr]": age, "comoving_distance[Mpc]": dc,
                    "transverse_distance[Mpc]": dm}
            for key, r in ref.items():
                if z == 0.0 and key.endswith("distance[Mpc]"):
                    ok = ours[key] == 0.0 and r == 0.0
                    d = abs(ours[key] - r)
                else:
                    d = rel(ours[key], r)
                    ok = d <= RTOL
                worst[key] = max(worst.get(key, 0.0), d)
                status = "ok  " if ok else "FAIL"
                print(f"{status} {name} z={z:g} {key}: jeansgrow {ours[key]:.10g} "
                      f"astropy {r:.10g} rel.diff {d:.2e} (tol {RTOL:g})")
                failures += 0 if ok else 1
    for key, d in worst.items():
        print(f"worst {key}: {d:.2e}")
    print(f"{failures} failure(s)")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
