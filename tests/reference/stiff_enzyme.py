"""Reference solution of tests/reference/stiff_enzyme.crn with scipy.integrate.solve_ivp.

Run: python3 tests/reference/stiff_enzyme.py > tests/reference/stiff_enzyme.json
(scipy >= 1.10, numpy). The Rust test reads the JSON; it needs no Python.

The network compiler rounds initial amounts to whole molecules, so the initial concentrations
here are round(c * N_A * V) / (N_A * V), exactly as the Rust side computes them. Rates are
mass action in mol/L and seconds; the inflow is the law vin * inhib(P, ki) = vin / (1 + P/ki).
The reference is Radau IIA (order 5) at rtol 1e-13 with the analytic Jacobian; BDF at the same
tolerance is run too, and the largest relative difference between the two is recorded as an
estimate of the reference's own error.
"""
import json
import sys

import numpy as np
import scipy
from scipy.integrate import solve_ivp

NA = 6.02214076e23
V = 1e-12
OMEGA = NA * V


def rounded(c):
    return round(c * OMEGA) / OMEGA


kon, koff, kcat = 1e8, 100.0, 1e-4
vin, ki, kclr = 0.005e-9, 50e-9, 1e4
X = rounded(100e-9)
y0 = np.array([rounded(100e-9), rounded(10e-6), 0.0, 0.0])  # E, S, C, P


def rhs(t, y):
    e, s, c, p = y
    bind = kon * e * s
    unbind = koff * c
    cat = kcat * c
    feed = vin / (1.0 + p / ki)
    clear = kclr * p * X
    return [
        -bind + unbind + cat,
        -bind + unbind + feed,
        bind - unbind - cat,
        cat - clear,
    ]


def jac(t, y):
    e, s, c, p = y
    dfeed = -vin / ki / (1.0 + p / ki) ** 2
    return [
        [-kon * s, -kon * e, koff + kcat, 0.0],
        [-kon * s, -kon * e, koff, dfeed],
        [kon * s, kon * e, -koff - kcat, 0.0],
        [0.0, 0.0, kcat, -kclr * X],
    ]


times = [1e-3, 1e-2, 0.1, 1.0, 10.0, 100.0, 1e3, 1e4, 1e5]
sols = {}
for method in ("Radau", "BDF"):
    r = solve_ivp(rhs, (0.0, times[-1]), y0, method=method, t_eval=times, jac=jac,
                  rtol=1e-13, atol=1e-24)
    if not r.success:
        sys.exit(f"{method} failed: {r.message}")
    sols[method] = r.y
ref = sols["Radau"]
spread = float(np.max(np.abs(ref - sols["BDF"]) / np.maximum(np.abs(ref), 1e-15)))
out = {
    "source": "scipy.integrate.solve_ivp, method Radau, rtol 1e-13, atol 1e-24, analytic Jacobian",
    "scipy_version": scipy.__version__,
    "species": ["E", "S", "C", "P"],
    "units": "mol/L",
    "times": times,
    "values": ref.T.tolist(),
    "radau_vs_bdf_max_relative_difference": spread,
}
json.dump(out, sys.stdout, indent=1)
print()
