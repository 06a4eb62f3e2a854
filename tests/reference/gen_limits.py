"""Reference values for tests/reference_limits.rs (CI reads only gen_limits.json).

Independent of lightfold's Rust code: numpy + scipy + pvlib.
  * E_n(x) from scipy.special.expn.
  * Lambertian limits of a silicon wafer under AM1.5G:
      - spectrum: ASTM G173-03 global tilt as shipped in pvlib (pvlib.spectrum.get_reference_spectra);
      - silicon n, k: M. A. Green, Sol. Energy Mater. Sol. Cells 92, 1305 (2008), the file
        data/nk/si_green2008.csv of this repository, interpolated linearly in wavelength;
      - alpha = 4 pi k / lambda;
      - Tiedje-Yablonovitch A = (1 - e^{-4aW}) / (1 - (1 - 1/n^2) e^{-4aW})
        (T. Tiedje, E. Yablonovitch, G. D. Cody, B. G. Brooks, IEEE Trans. Electron Devices 31,
        711 (1984); E. Yablonovitch, JOSA 72, 899 (1982));
      - exact ideal Lambertian wafer: same with the round-trip survival 2 E_3(2aW) in place of
        e^{-4aW};
      - single pass 1 - e^{-aW}, double pass 1 - e^{-2aW}.
    J = q * integral(Phi * A dlambda), Phi = E lambda / (h c), trapezoid over the native
    G173 wavelengths in [300, 1200] nm, in two variants:
      "native": A evaluated at every native wavelength from interpolated n, k;
      "grid10": A evaluated on 300:1200:10 nm and interpolated linearly onto the native
                wavelengths (what `lightfold limit` does with its default grid).
    max_ma_cm2_300_1107: A = 1 over [300, 1107] nm (1107 nm ~ 1.12 eV, silicon's band gap at
    300 K); max_ma_cm2_300_1200: A = 1 over the whole band (Green's k extends past the gap:
    phonon-assisted absorption, so the Lambertian currents over 300-1200 nm can exceed the
    300-1107 figure).
Run: python3 tests/reference/gen_limits.py  (from the repository root)
"""
import json
import os

import numpy as np
import pvlib
import scipy
from scipy.special import expn

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))

H = 6.62607015e-34
C = 299792458.0
Q = 1.602176634e-19


def load_si():
    rows = [l for l in open(os.path.join(ROOT, "data/nk/si_green2008.csv")) if l[0].isdigit()]
    a = np.array([[float(x) for x in l.split(",")] for l in rows])
    return a[:, 0], a[:, 1], a[:, 2]


def limits(n, k, lam_nm, w_um):
    alpha = 4 * np.pi * k / (lam_nm * 1e-7)  # 1/cm
    aw = alpha * w_um * 1e-4
    ty_s = np.exp(-4 * aw)
    ex_s = 2 * expn(3, 2 * aw)
    ty = (1 - ty_s) / (1 - (1 - 1 / n**2) * ty_s)
    ex = (1 - ex_s) / (1 - (1 - 1 / n**2) * ex_s)
    return {
        "single_pass": 1 - np.exp(-aw),
        "double_pass": 1 - np.exp(-2 * aw),
        "tiedje_yablonovitch": ty,
        "lambertian_exact": ex,
    }


def main():
    spec = pvlib.spectrum.get_reference_spectra()
    lam_all = spec.index.to_numpy(dtype=float)
    e_all = spec["global"].to_numpy(dtype=float)
    lo, hi = 300.0, 1200.0
    sel = (lam_all >= lo) & (lam_all <= hi)
    lam, e = lam_all[sel], e_all[sel]
    assert lam[0] == lo and lam[-1] == hi
    phi = e * lam * 1e-9 / (H * C)  # photons / m^2 / s / nm
    to_ma_cm2 = Q * 0.1  # A/m^2 -> mA/cm^2

    def current(a):
        return float(np.trapezoid(phi * a, lam) * to_ma_cm2)

    wl, n_tab, k_tab = load_si()
    n_nat, k_nat = np.interp(lam, wl, n_tab), np.interp(lam, wl, k_tab)
    grid = np.arange(300.0, 1200.0 + 1e-9, 10.0)
    n_g, k_g = np.interp(grid, wl, n_tab), np.interp(grid, wl, k_tab)

    out = {
        "generator": "tests/reference/gen_limits.py",
        "versions": {"numpy": np.__version__, "scipy": scipy.__version__, "pvlib": pvlib.__version__},
        "band_nm": [lo, hi],
        "expn": [],
        "photocurrent": [],
        "pointwise": [],
    }
    for nn in range(1, 6):
        for x in [1e-10, 1e-6, 1e-3, 0.1, 0.5, 0.999, 1.0, 1.001, 2.0, 5.0, 10.0, 50.0, 100.0, 300.0, 700.0]:
            out["expn"].append({"n": nn, "x": x, "value": float(expn(nn, x))})
    sel_max = (lam_all >= lo) & (lam_all <= 1107.0)
    lam_m = lam_all[sel_max]
    phi_m = e_all[sel_max] * lam_m * 1e-9 / (H * C)
    # 1107 is a native point of G173 (1 nm steps there): no edge interpolation needed.
    assert lam_m[-1] == 1107.0
    out["max_ma_cm2_300_1107"] = float(np.trapezoid(phi_m, lam_m) * to_ma_cm2)
    out["max_ma_cm2_300_1200"] = current(np.ones_like(lam))
    for w in [110.0, 160.0]:
        nat = limits(n_nat, k_nat, lam, w)
        g = limits(n_g, k_g, grid, w)
        rec = {"thickness_um": w}
        for key in nat:
            rec[key + "_native_ma_cm2"] = current(nat[key])
            rec[key + "_grid10_ma_cm2"] = current(np.interp(lam, grid, g[key]))
        out["photocurrent"].append(rec)
        for lam_p in [800.0, 1000.0, 1100.0, 1150.0, 1200.0]:
            i = int(np.argmin(abs(grid - lam_p)))
            out["pointwise"].append(
                {"thickness_um": w, "wavelength_nm": lam_p, "n": float(n_g[i]), "k": float(k_g[i]),
                 **{key: float(v[i]) for key, v in g.items()}}
            )
    with open(os.path.join(HERE, "gen_limits.json"), "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")
    for r in out["photocurrent"]:
        print(r)
    print("max", out["max_ma_cm2_300_1107"])


if __name__ == "__main__":
    main()
