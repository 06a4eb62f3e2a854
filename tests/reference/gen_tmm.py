#!/usr/bin/env python3
"""Reference values for tests/reference_tmm.rs from the `tmm` package.

Source: S. J. Byrnes, "Multilayer optical calculations", arXiv:1603.02720 (2016), and its
Python package `tmm` (PyPI, `pip install tmm numpy`). Indices are literal n + ik values
(no material library): each case is a stack, a wavelength and an angle; every case is
computed for s and p with `tmm.coh_tmm` (complex r and t, R, T) and
`tmm.absorp_in_each_layer` (absorptance of each film).

Run from the repository root:  python3 tests/reference/gen_tmm.py
It rewrites tests/reference/tmm_cases.json; CI reads only the JSON.
"""
import json
import math
import os

import numpy as np
import tmm

AIR = (1.0, 0.0)
GLASS = (1.5, 0.0)
SI_600 = (3.94, 0.02)  # literal values, close to crystalline Si at 600 nm
SI_1000 = (3.57, 0.0)  # real part only: incidence from inside the wafer
SI_3_5 = (3.5, 0.0)  # critical angle to air asin(1/3.5) = 16.60 deg
SINX = (2.05, 0.001)
SIO2 = (1.45, 0.0)
MGF2 = (1.38, 0.0)
ITO = (1.9, 0.025)  # absorbing TCO
ITO_BLUE = (2.05, 0.06)
AG = (0.04, 7.1)  # silver near 1000 nm, literal
AL = (1.2, 10.0)


def case(name, wavelength_nm, angles_deg, above, layers, below):
    """layers: list of (n, k, thickness_nm) from top to bottom."""
    return [
        dict(name=f"{name} @ {a:g} deg", wavelength_nm=wavelength_nm, angle_deg=a,
             above=list(above), layers=[list(l) for l in layers], below=list(below))
        for a in angles_deg
    ]


CASES = []
# Bare interfaces
CASES += case("air/glass bare", 550.0, [0.0, 30.0, 56.3, 85.0], AIR, [], GLASS)
CASES += case("air/Si bare", 600.0, [0.0, 45.0, 75.0], AIR, [], SI_600)
CASES += case("air/Ag bare (metal exit)", 1000.0, [0.0, 70.0], AIR, [], AG)
# Single films
CASES += case("SiNx 75 nm on Si", 600.0, [0.0, 40.0, 70.0, 89.0], AIR, [SINX + (75.0,)], SI_600)
CASES += case("ITO 80 nm on Si (absorbing TCO)", 600.0, [0.0, 60.0], AIR, [ITO + (80.0,)], SI_600)
CASES += case("ITO 80 nm on glass, blue", 420.0, [25.0], AIR, [ITO_BLUE + (80.0,)], GLASS)
# Multi-layer
CASES += case("MgF2/SiNx double AR on Si", 600.0, [0.0, 50.0], AIR,
              [MGF2 + (100.0,), SINX + (60.0,)], SI_600)
CASES += case("glass/ITO/SiO2/SiNx on Si", 700.0, [0.0, 35.0], GLASS,
              [ITO + (100.0,), SIO2 + (20.0,), SINX + (70.0,)], (3.78, 0.008))
CASES += case("five-layer mixed stack", 500.0, [45.0], AIR,
              [(1.38, 0.0, 95.0), (2.3, 0.01, 40.0), (1.46, 0.0, 130.0), (2.0, 0.1, 12.0),
               (1.6, 0.0, 300.0)], (4.3, 0.07))
# From the high-index side, below and beyond the critical angle (16.60 deg to air)
CASES += case("Si -> SiNx 75 nm -> air, from inside", 1000.0, [10.0, 16.0, 17.0, 30.0, 60.0],
              SI_3_5, [SINX + (75.0,)], AIR)
CASES += case("Si -> ITO -> air, from inside (absorbing, TIR)", 1000.0, [12.0, 40.0],
              SI_3_5, [ITO + (90.0,)], AIR)
# Metal rear reflector: Si / SiO2 / Ag, from inside the silicon
CASES += case("Si/SiO2 100 nm/Ag rear reflector", 1000.0, [0.0, 20.0, 24.0, 30.0, 60.0],
              SI_1000, [SIO2 + (100.0,)], AG)
CASES += case("Si/SiO2 10 nm/Al rear", 1050.0, [0.0, 45.0], SI_1000, [SIO2 + (10.0,)], AL)
# Frustrated total internal reflection and thick evanescent gaps
CASES += case("glass/air gap 200 nm/glass (frustrated TIR)", 633.0, [50.0, 60.0], GLASS,
              [AIR + (200.0,)], GLASS)
CASES += case("Si/air gap 2000 nm/Si (deep evanescent)", 1000.0, [30.0], SI_3_5,
              [AIR + (2000.0,)], SI_3_5)


def pol_result(pol, n_list, d_list, th0, lam):
    res = tmm.coh_tmm(pol, n_list, d_list, th0, lam)
    absorp = tmm.absorp_in_each_layer(res)
    return dict(r=[res["r"].real, res["r"].imag], t=[res["t"].real, res["t"].imag],
                R=float(res["R"]), T=float(res["T"]),
                A=[float(a) for a in absorp[1:-1]])


def main():
    out = []
    for c in CASES:
        n_list = [complex(*c["above"])] + [complex(l[0], l[1]) for l in c["layers"]] \
            + [complex(*c["below"])]
        d_list = [np.inf] + [l[2] for l in c["layers"]] + [np.inf]
        th0 = c["angle_deg"] * math.pi / 180.0
        entry = dict(c)
        for pol in ("s", "p"):
            entry[pol] = pol_result(pol, n_list, d_list, th0, c["wavelength_nm"])
        out.append(entry)
    doc = dict(
        source="S. J. Byrnes, arXiv:1603.02720 (2016); Python package tmm "
               + getattr(tmm, "__version__", "0.2.0"),
        generator="tests/reference/gen_tmm.py",
        conventions="N = n + ik, k >= 0; angles in degrees in the incidence medium; "
                    "layers [n, k, thickness_nm] top to bottom; r, t as [re, im]; "
                    "A = absorptance of each film (tmm.absorp_in_each_layer without the "
                    "half-spaces)",
        cases=out,
    )
    path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "tmm_cases.json")
    # One case per line: readable diffs when the reference is re-minted.
    head = {k: v for k, v in doc.items() if k != "cases"}
    text = json.dumps(head, indent=1)[:-2] + ',\n "cases": [\n  '
    text += ",\n  ".join(json.dumps(c) for c in doc["cases"]) + "\n ]\n}\n"
    json.loads(text)  # still valid JSON
    with open(path, "w") as f:
        f.write(text)
    print(f"{len(out)} cases written to {path}")


if __name__ == "__main__":
    main()
