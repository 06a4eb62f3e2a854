#!/usr/bin/env python3
"""Reference values for tests/reference_fresnel.rs from the `tmm` package.

Source: S. J. Byrnes, "Multilayer optical calculations", arXiv:1603.02720 (2016), and its
Python package `tmm` (PyPI, `pip install tmm numpy`). A bare interface is the stack
[n_i, n_t] with two semi-infinite media; `tmm.coh_tmm` returns the complex amplitude
coefficients r, t (Born & Wolf sign convention for p) and the power coefficients R, T.
Incident media are lossless (a requirement of coh_tmm).

Run from the repository root:  python3 tests/reference/gen_fresnel.py
It rewrites tests/reference/fresnel_tmm.json; CI reads only the JSON.
"""
import json
import math
import os
from importlib.metadata import version

import numpy as np
import tmm

PAIRS = [
    # (label, n_i, n_t): literal indices
    ("air to glass", 1.0, 1.5),
    ("air to Si 600 nm", 1.0, 3.94 + 0.019934j),
    ("air to silver-like metal", 1.0, 0.05 + 4.0j),
    ("air to strongly absorbing", 1.0, 4.0 + 2.0j),
    ("glass to SiNx", 1.5, 2.05 + 0.001j),
    ("Si to air (TIR above 16.6 deg)", 3.5, 1.0),
    ("glass to air (TIR above 41.8 deg)", 1.5, 1.0),
    ("glass to absorbing film", 1.5, 1.2 + 0.3j),
]
ANGLES_DEG = [0.0, 10.0, 16.0, 17.0, 30.0, 41.0, 42.0, 45.0, 60.0, 75.0, 85.0, 89.0]


def cplx(z):
    return [float(np.real(z)), float(np.imag(z))]


def main():
    cases = []
    for label, n_i, n_t in PAIRS:
        for angle in ANGLES_DEG:
            entry = dict(label=label, n_i=cplx(n_i), n_t=cplx(n_t), angle_deg=angle)
            for pol in ("s", "p"):
                res = tmm.coh_tmm(pol, [n_i, n_t], [math.inf, math.inf], math.radians(angle), 500.0)
                entry[f"r_{pol}"] = cplx(res["r"])
                entry[f"t_{pol}"] = cplx(res["t"])
                entry[f"R_{pol}"] = float(res["R"])
                entry[f"T_{pol}"] = float(res["T"])
            cases.append(entry)
    out = dict(
        generator="tests/reference/gen_fresnel.py",
        library=f"tmm {version('tmm')}, numpy {np.__version__}",
        source="S. J. Byrnes, arXiv:1603.02720; tmm.coh_tmm on a two-medium stack",
        cases=cases,
    )
    path = os.path.join(os.path.dirname(__file__), "fresnel_tmm.json")
    with open(path, "w") as f:
        json.dump(out, f, indent=1)
    print(f"wrote {len(cases)} cases to {path}")


if __name__ == "__main__":
    main()
