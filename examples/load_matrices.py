"""Load redistribution matrices exported by lightfold (format "lightfold-matrices", version 1).

Usage: python3 examples/load_matrices.py path/to/front_1000nm.json
Needs numpy only. Not run in CI.
"""
import json
import os
import sys

import numpy as np


def load(sidecar_path):
    with open(sidecar_path) as f:
        meta = json.load(f)
    if meta.get("format") != "lightfold-matrices" or meta.get("version") != 1:
        raise ValueError(f"{sidecar_path}: not a version-1 lightfold-matrices sidecar")
    folder = os.path.dirname(os.path.abspath(sidecar_path))
    arrays = {}
    for name, rec in meta["arrays"].items():
        a = np.load(os.path.join(folder, rec["file"]))
        if list(a.shape) != rec["shape"]:
            raise ValueError(f"{rec['file']}: shape {a.shape}, sidecar says {rec['shape']}")
        arrays[name] = a
    return meta, arrays


if __name__ == "__main__":
    meta, m = load(sys.argv[1])
    b = meta["bins"]
    print(f"{meta['wavelength_nm']} nm, {meta['above']['id']} (n={meta['above']['n']}) over "
          f"{meta['below']['id']} (n={meta['below']['n']}), {b['n_polar']} x {b['n_azimuth']} bins "
          f"({b['symmetry']})")
    # Column sums: R + T + A = 1 for each incoming bin (up to the energy audit).
    total = m["r_above"].sum(0) + m["t_above"].sum(0) + m["a_above"].sum(0)
    print("max |column sum - 1| from above:", np.abs(total - 1).max())
    # Lambertian (isotropic) illumination from above: power per bin proportional to etendue.
    e = np.array(b["etendue_sr"])
    inc = e / e.sum()
    print("R for Lambertian light from above:", float((m["r_above"] @ inc).sum()))
