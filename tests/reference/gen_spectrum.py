#!/usr/bin/env python3
"""Reference values for tests/reference_spectrum.rs, computed independently of lightfold.

Spectra: ASTM G173-03 as shipped in pvlib (`pvlib.spectrum.get_reference_spectra()`).
Constants: scipy.constants (2019 SI exact h, c, e). Integrals: numpy / scipy.

Two quadratures are written out for every photocurrent:

* ``native_trapezoid``: the rule lightfold documents -- trapezoid on the spectrum's own
  wavelengths, band edges inserted by linear interpolation of the irradiance, photon flux
  Phi = E * lambda / (h c) evaluated at those nodes, the absorptance interpolated linearly
  onto them (np.interp) and taken as 0 outside its grid. Implemented here from scratch with
  numpy; lightfold must agree to round-off (1e-6 relative in the test).
* ``exact_piecewise_linear``: the exact integral of the product of the piecewise-linear
  interpolants of E(lambda) and A(lambda) times lambda, on the union of both node sets
  (each sub-interval is a cubic in lambda, integrated exactly by Simpson's rule). It differs
  from the trapezoid rule only by the rule's own truncation error; the test uses it to bound
  that error.

``coarse_10nm``: the habit the design warns against -- AM1.5G sampled only at the 10 nm
simulation grid (pvlib's own linear interpolation, `get_reference_spectra(wavelengths=grid)`),
then a trapezoid on that grid.

Run: ``pip install pvlib numpy scipy && python tests/reference/gen_spectrum.py``
(writes tests/reference/spectrum_pvlib.json next to this script).
"""

import json
import pathlib

import numpy as np
import pvlib
import scipy
import scipy.constants as const
from scipy.integrate import simpson, trapezoid

H = const.h  # J s
C = const.c  # m / s
Q = const.e  # C
# A/m^2 -> mA/cm^2: 1e3 mA/A / 1e4 cm^2/m^2
A_M2_TO_MA_CM2 = 0.1

spectra = pvlib.spectrum.get_reference_spectra()
WL = spectra.index.to_numpy(dtype=float)
COLUMNS = {"am1.5g": "global", "am1.5d": "direct", "g173-etr": "extraterrestrial"}


def irradiance(col):
    return spectra[col].to_numpy(dtype=float)


def native_nodes(col, lo, hi):
    """Spectrum nodes strictly inside (lo, hi) plus the two edges, E interpolated there."""
    e = irradiance(col)
    lo = max(lo, WL[0])
    hi = min(hi, WL[-1])
    inner = (WL > lo) & (WL < hi)
    x = np.concatenate(([lo], WL[inner], [hi]))
    y = np.concatenate(([np.interp(lo, WL, e)], e[inner], [np.interp(hi, WL, e)]))
    return x, y


def photon_flux(x_nm, e):
    """photons m^-2 s^-1 nm^-1 from W m^-2 nm^-1."""
    return e * (x_nm * 1e-9) / (H * C)


def total_irradiance(col, band):
    x, y = native_nodes(col, *band)
    return trapezoid(y, x)


def j_native(col, grid, a):
    """q * integral(Phi A), trapezoid on native nodes, A = 0 outside its grid."""
    x, y = native_nodes(col, grid[0], grid[-1])
    a_nodes = np.interp(x, grid, a)
    return Q * trapezoid(photon_flux(x, y) * a_nodes, x) * A_M2_TO_MA_CM2


def j_native_se(col, grid, a, se):
    """SE of J: J is linear in the grid values A_j, so SE = sqrt(sum (dJ/dA_j)^2 se_j^2).
    dJ/dA_j is J evaluated with A = e_j (the j-th unit vector), exact because J is linear."""
    g = np.array([j_native(col, grid, np.eye(len(grid))[j]) for j in range(len(grid))])
    return float(np.sqrt(np.sum((g * se) ** 2))), g


def j_exact_piecewise_linear(col, grid, a):
    """Exact integral of lambda * E_lin(lambda) * A_lin(lambda) on the merged nodes."""
    e = irradiance(col)
    lo, hi = max(grid[0], WL[0]), min(grid[-1], WL[-1])
    nodes = np.union1d(WL[(WL > lo) & (WL < hi)], grid[(grid > lo) & (grid < hi)])
    nodes = np.concatenate(([lo], nodes, [hi]))
    total = 0.0
    for x0, x1 in zip(nodes[:-1], nodes[1:]):
        xs = np.array([x0, 0.5 * (x0 + x1), x1])
        f = photon_flux(xs, np.interp(xs, WL, e)) * np.interp(xs, grid, a)
        total += simpson(f, x=xs)  # exact for the cubic on [x0, x1]
    return Q * total * A_M2_TO_MA_CM2


def j_coarse(col, grid, a):
    e_grid = pvlib.spectrum.get_reference_spectra(wavelengths=grid)[col].to_numpy(dtype=float)
    return Q * trapezoid(photon_flux(grid, e_grid) * a, grid) * A_M2_TO_MA_CM2


def weighted_mean(col, grid, v, band):
    x, y = native_nodes(col, *band)
    phi = photon_flux(x, y)
    return trapezoid(phi * np.interp(x, grid, v), x) / trapezoid(phi, x)


# Test curves on a 10 nm grid, 300-1200 nm (closed forms, smooth).
GRID = np.arange(300.0, 1200.0 + 1e-9, 10.0)


def wafer_absorptance(x):
    """Textured-wafer-like A(lambda): front reflectance 2-10 %, optical depth rolling off
    past 900 nm (a shape, not a simulation)."""
    reflect = 0.02 + 0.08 * np.exp(-(x - 300.0) / 60.0)
    depth = 50.0 * np.exp(-(x - 900.0) / 40.0)
    return (1.0 - reflect) * (1.0 - np.exp(-depth))


def wafer_reflectance(x):
    """A smooth AR-coated-like reflectance with a minimum near 600 nm."""
    return 0.03 + 0.25 * ((x - 600.0) / 600.0) ** 2


A_TEST = wafer_absorptance(GRID)
SE_TEST = 0.002 + 0.001 * np.sin(GRID / 37.0) ** 2  # per-point standard errors
R_TEST = wafer_reflectance(GRID)

# A = 1 on a two-point grid spanning the band.
def j_max(col, band):
    return j_native(col, np.array(band, dtype=float), np.ones(2))


# Filtered spectrum: a transmittance curve on a coarse grid, total irradiance afterwards.
T_GRID = np.array([350.0, 500.0, 700.0, 900.0, 1300.0])
T_VALUES = np.array([0.1, 0.6, 0.9, 0.95, 0.8])


def filtered_total(col):
    x, y = native_nodes(col, T_GRID[0], T_GRID[-1])
    return trapezoid(y * np.interp(x, T_GRID, T_VALUES), x)


out = {
    "source": "pvlib.spectrum.get_reference_spectra() (ASTM G173-03), scipy.constants, numpy",
    "versions": {"pvlib": pvlib.__version__, "numpy": np.__version__, "scipy": scipy.__version__},
    "constants": {"h_J_s": H, "c_m_s": C, "q_C": Q},
    "n_points": int(len(WL)),
    "total_irradiance_w_m2": {
        sid: {
            "280-4000": total_irradiance(col, (280.0, 4000.0)),
            "300-1200": total_irradiance(col, (300.0, 1200.0)),
            "400.25-700.75": total_irradiance(col, (400.25, 700.75)),
        }
        for sid, col in COLUMNS.items()
    },
    "photon_flux_at": {
        sid: {str(w): float(photon_flux(w, np.interp(w, WL, irradiance(col))))
              for w in (500.0, 632.8, 1000.25)}
        for sid, col in COLUMNS.items()
    },
    "max_photocurrent_ma_cm2": {
        "am1.5g": {
            "280-1107": j_max("global", (280.0, 1107.0)),
            "300-1200": j_max("global", (300.0, 1200.0)),
            "280-4000": j_max("global", (280.0, 4000.0)),
        },
        "am1.5d": {"280-1107": j_max("direct", (280.0, 1107.0))},
        "g173-etr": {"280-1107": j_max("extraterrestrial", (280.0, 1107.0))},
    },
    "test_curves": {
        "grid_nm": GRID.tolist(),
        "absorptance": A_TEST.tolist(),
        "absorptance_se": SE_TEST.tolist(),
        "reflectance": R_TEST.tolist(),
        "formula_absorptance": "(1 - (0.02 + 0.08 exp(-(l-300)/60))) * (1 - exp(-50 exp(-(l-900)/40)))",
        "formula_reflectance": "0.03 + 0.25 ((l-600)/600)^2",
    },
    "photocurrent_am15g": {},
    "photon_weighted_reflectance_am15g_300_1200": weighted_mean("global", GRID, R_TEST, (300.0, 1200.0)),
    "filtered": {
        "grid_nm": T_GRID.tolist(),
        "transmittance": T_VALUES.tolist(),
        "total_irradiance_w_m2_am15g": filtered_total("global"),
    },
}

j_se, _ = j_native_se("global", GRID, A_TEST, SE_TEST)
out["photocurrent_am15g"] = {
    "native_trapezoid_ma_cm2": j_native("global", GRID, A_TEST),
    "native_trapezoid_se_ma_cm2": j_se,
    "exact_piecewise_linear_ma_cm2": j_exact_piecewise_linear("global", GRID, A_TEST),
    "coarse_10nm_ma_cm2": j_coarse("global", GRID, A_TEST),
}

path = pathlib.Path(__file__).with_name("spectrum_pvlib.json")
path.write_text(json.dumps(out, indent=1) + "\n")
print(json.dumps({k: v for k, v in out.items() if k != "test_curves"}, indent=1))
