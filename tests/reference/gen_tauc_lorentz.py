#!/usr/bin/env python3
"""Reference values for the Tauc-Lorentz test in tests/reference_materials.rs.

Model: G. E. Jellison Jr. & F. A. Modine, Appl. Phys. Lett. 69, 371 (1996); erratum 69,
2137 (1996). Only eps2 is taken from the model definition:
    eps2(E) = A E0 C (E - Eg)^2 / ((E^2 - E0^2)^2 + C^2 E^2) / E   for E > Eg, else 0.
eps1 is computed here independently of any closed form, by the Kramers-Kronig relation
    eps1(E) = eps_inf + (2/pi) P int_Eg^inf  x eps2(x) / (x^2 - E^2) dx,
with scipy.integrate.quad (weight='cauchy' for the principal value). The Rust closed form
must reproduce these numbers.

Run from the repository root:  python3 tests/reference/gen_tauc_lorentz.py  (needs scipy)
It rewrites tests/reference/tauc_lorentz_kk.json; CI reads only the JSON.
"""
import json
import math
import os

import scipy
from scipy.integrate import quad

# Parameter sets (eV): the first close to Jellison & Modine's amorphous-Si fit (from memory),
# the second a wide-gap dielectric such as a SiNx film (illustrative values).
PARAMS = [
    dict(label="a-Si like", eps_inf=1.15, a_ev=122.0, e0_ev=3.45, c_ev=2.54, eg_ev=1.20),
    dict(label="SiNx like", eps_inf=2.0, a_ev=60.0, e0_ev=8.0, c_ev=3.0, eg_ev=4.0),
]
ENERGIES_EV = [0.6, 1.0, 1.2, 1.6, 2.0, 2.5, 3.0, 3.5, 4.0, 4.5, 5.0, 6.0, 8.0, 10.0]


def eps1_kk(p, e):
    a, e0, c, eg = p["a_ev"], p["e0_ev"], p["c_ev"], p["eg_ev"]

    def eps2(x):
        if x <= eg:
            return 0.0
        return a * e0 * c * (x - eg) ** 2 / (((x * x - e0 * e0) ** 2 + c * c * x * x) * x)

    f = lambda x: x * eps2(x) / (x + e)  # remaining factor 1/(x - e)
    split = e + 50.0
    if e > eg:
        near = quad(f, eg, split, weight="cauchy", wvar=e, limit=800, epsabs=1e-13, epsrel=1e-12)[0]
    else:
        near = quad(lambda x: f(x) / (x - e), eg, split, limit=800, epsabs=1e-13, epsrel=1e-12)[0]
    tail = quad(lambda x: f(x) / (x - e), split, math.inf, limit=800, epsabs=1e-13, epsrel=1e-12)[0]
    return p["eps_inf"] + 2.0 / math.pi * (near + tail), eps2(e)


def main():
    sets = []
    for p in PARAMS:
        points = []
        for e in ENERGIES_EV:
            if abs(e - p["eg_ev"]) < 1e-12:
                continue
            e1, e2 = eps1_kk(p, e)
            points.append(dict(energy_ev=e, eps1=e1, eps2=e2))
        sets.append(dict(p, points=points))
    out = dict(
        generator="tests/reference/gen_tauc_lorentz.py",
        library=f"scipy {scipy.__version__} (quad, Kramers-Kronig principal value)",
        source="Jellison & Modine, Appl. Phys. Lett. 69, 371 (1996), eps2 definition only",
        sets=sets,
    )
    path = os.path.join(os.path.dirname(__file__), "tauc_lorentz_kk.json")
    with open(path, "w") as f:
        json.dump(out, f, indent=1)
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
