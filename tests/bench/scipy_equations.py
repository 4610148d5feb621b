"""The perturbation equations of src/PHYSICS.md §7.1 (fluctuating sound speed,
with the ionisation-fraction perturbation delta_xe when the model has it) for
SciPy's solve_ivp: the one copy the SciPy benchmarks share
(tests/bench/scipy_perturb.py, tests/bench/scipy_growth.py).

The coefficients come from DIR/perturb_coefficients.txt, written by
bench_perturb (the model's medium evaluated on the nodes of its table), and
are interpolated as the library tabulates them: natural cubic splines of
ln p, ln d, ln r, of e and g, of asinh of the four delta_xe rates (they change
sign), and of the ratios heating_ionisation / r and pressure_ionisation / p.
State y = {delta_c, delta_c', delta_b, delta_b', delta_T, delta_xe} in
x = ln a; ' = d/d ln a. A model without delta_xe has zero delta_xe
coefficients in the table, and delta_xe stays 0.
"""
import math

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.special import hyp2f1

COEFFICIENT_FILE = "perturb_coefficients.txt"
# The interpolated quantities, in the order of the per-interval polynomials.
_SPLINED = ("e", "g", "ln_p", "ln_d", "ln_r", "asinh_qr", "asinh_qb", "asinh_qT", "asinh_qv",
            "heating_per_r", "pressure_per_p")


class Coefficients:
    """The medium of one model: meta data, baryon fraction, the spline
    evaluation coeffs(x) -> (e, g, p, d, r, q_r, q_b, q_T, q_v, h_x, p w_x)."""

    def __init__(self, directory):
        path = f"{directory}/{COEFFICIENT_FILE}"
        with open(path) as f:
            f.readline()
            words = f.readline().split()
            names = f.readline().lstrip("#").split()
        self.meta = {words[i]: float(words[i + 1]) for i in range(1, len(words) - 1, 2)}
        if self.meta.get("fluctuating", 1.0) != 1.0:
            raise SystemExit(f"{path}: the SciPy equations are those of the fluctuating sound "
                             "speed; this model has another")
        table = np.loadtxt(path)
        col = {name.split("[")[0]: table[:, i] for i, name in enumerate(names)}
        self.ionisation = self.meta.get("ionisation", 0.0) == 1.0
        if self.ionisation and "ionisation_relaxation" not in col:
            raise SystemExit(f"{path}: no delta_xe coefficients; rebuild bench_perturb")
        self.baryon_fraction = float(col["baryon_fraction"][0])
        x = col["ln_a"]
        zero = np.zeros_like(x)
        values = [col["dlnH_dlna"], col["gravity"], np.log(col["pressure"]), np.log(col["drag"]),
                  np.log(col["relaxation"])]
        if self.ionisation:
            values += [np.arcsinh(col["ionisation_relaxation"]),
                       np.arcsinh(col["ionisation_density"]),
                       np.arcsinh(col["ionisation_temperature"]),
                       np.arcsinh(col["ionisation_expansion"]),
                       col["heating_ionisation"] / col["relaxation"],
                       col["pressure_ionisation"] / col["pressure"]]
        else:
            values += [zero] * 6
        self.spline = CubicSpline(x, np.column_stack(values), bc_type="natural")
        self.ln_a_min, self.ln_a_max = float(x[0]), float(x[-1])
        self.coeffs = self._fast_evaluation(x)

    def _fast_evaluation(self, x):
        """Scalar evaluation on the (uniform) grid in plain Python floats: one
        index computation and eleven Horner sums (CubicSpline.__call__ costs
        several microseconds of array handling per scalar call); checked
        against CubicSpline itself."""
        spl = self.spline
        # spl.c[m, i, q]: coefficient of (x - x_i)^(3 - m) on interval i.
        poly = [tuple(float(v) for v in spl.c[:, i, :].T.ravel()) for i in range(len(x) - 1)]
        xb = [float(v) for v in x]
        x0, inv_h, last = xb[0], (len(x) - 1) / (xb[-1] - xb[0]), len(x) - 2
        exp, sinh = math.exp, math.sinh

        def coeffs(xx):
            i = int((xx - x0) * inv_h)
            i = 0 if i < 0 else (last if i > last else i)
            t = xx - xb[i]
            c = poly[i]
            e = ((c[0] * t + c[1]) * t + c[2]) * t + c[3]
            g = ((c[4] * t + c[5]) * t + c[6]) * t + c[7]
            p = exp(((c[8] * t + c[9]) * t + c[10]) * t + c[11])
            d = exp(((c[12] * t + c[13]) * t + c[14]) * t + c[15])
            r = exp(((c[16] * t + c[17]) * t + c[18]) * t + c[19])
            qr = sinh(((c[20] * t + c[21]) * t + c[22]) * t + c[23])
            qb = sinh(((c[24] * t + c[25]) * t + c[26]) * t + c[27])
            qT = sinh(((c[28] * t + c[29]) * t + c[30]) * t + c[31])
            qv = sinh(((c[32] * t + c[33]) * t + c[34]) * t + c[35])
            hx = (((c[36] * t + c[37]) * t + c[38]) * t + c[39]) * r
            pw = (((c[40] * t + c[41]) * t + c[42]) * t + c[43]) * p
            return e, g, p, d, r, qr, qb, qT, qv, hx, pw

        def reference(xx):
            v = spl(xx)
            return (v[0], v[1], math.exp(v[2]), math.exp(v[3]), math.exp(v[4]), math.sinh(v[5]),
                    math.sinh(v[6]), math.sinh(v[7]), math.sinh(v[8]), v[9] * math.exp(v[4]),
                    v[10] * math.exp(v[2]))

        for xx in np.linspace(x[0], x[-1], 1001):
            fast, want = coeffs(float(xx)), reference(xx)
            for a, b in zip(fast, want):
                if abs(a - b) > 1e-12 * abs(b) + 1e-300:
                    raise SystemExit(f"spline evaluation differs at x = {xx}: {fast} vs {want}")
        return coeffs

    def initial_state(self):
        """(x_initial, y0): CDM on the Meszaros growing mode with a smooth
        share f_b of the matter, 2F1(alpha, beta; 1; -y) from
        scipy.special.hyp2f1 (independent of the C code's Pfaff-transformed
        GSL evaluation); baryons at rest and empty; delta_xe in its
        quasi-equilibrium with them (src/PHYSICS.md §7.1), here 0."""
        fb = self.baryon_fraction
        x0 = -math.log1p(self.meta["z_initial"])
        y_eq = math.exp(x0) / self.meta["a_equality"]
        s = math.sqrt(0.25 + 6.0 * (1.0 - fb))
        al, be = 0.5 * (0.5 + s), 0.5 * (0.5 - s)
        D = hyp2f1(al, be, 1.0, -y_eq)
        dD = -al * be * hyp2f1(al + 1.0, be + 1.0, 2.0, -y_eq)
        y0 = [1.0, y_eq * dD / D, 0.0, 0.0, 0.0]
        c = self.coeffs(x0)
        y0.append((c[6] * y0[2] + c[7] * y0[4] + c[8] * y0[3]) / c[5] if c[5] > 0.0 else 0.0)
        return x0, np.array(y0)

    def system(self, k):
        """fun(x, y), jac(x, y) of the mode k (1/Mpc) for solve_ivp."""
        coeffs, fb, k2 = self.coeffs, self.baryon_fraction, k * k
        fc = 1.0 - fb

        def fun(xx, y):
            e, g, p, dr, r, qr, qb, qT, qv, hx, pw = coeffs(xx)
            grav = g * (fc * y[0] + fb * y[2])
            return np.array([
                y[1],
                -(2.0 + e) * y[1] + grav,
                y[3],
                -(2.0 + e + dr) * y[3] + grav - k2 * (p * (y[2] + y[4]) + pw * y[5]),
                (2.0 / 3.0) * y[3] - r * y[4] + hx * y[5],
                -qr * y[5] + qb * y[2] + qT * y[4] + qv * y[3],
            ])

        def jac(xx, y):
            e, g, p, dr, r, qr, qb, qT, qv, hx, pw = coeffs(xx)
            pk2 = p * k2
            return np.array([
                [0.0, 1.0, 0.0, 0.0, 0.0, 0.0],
                [g * fc, -(2.0 + e), g * fb, 0.0, 0.0, 0.0],
                [0.0, 0.0, 0.0, 1.0, 0.0, 0.0],
                [g * fc, 0.0, g * fb - pk2, -(2.0 + e + dr), -pk2, -pw * k2],
                [0.0, 0.0, 0.0, 2.0 / 3.0, -r, hx],
                [0.0, 0.0, qb, qv, qT, -qr],
            ])
        return fun, jac
