"""Rebuild ``fringemap/data/bundle.npz`` from colour-science and refractiveindex.info.

Run ``python -m fringemap.data.build`` after changing a built-in material,
light or detector. Keys:

* ``light/<NAME>`` — relative power on :data:`fringemap.colour.spectra.GRID_NM`;
* ``detector/<name>`` — (W, 3) sensitivities on the same grid;
* ``material/<name>`` — (M, 3) rows of wavelength_nm, n, k at 1 nm steps.
"""

from __future__ import annotations

import numpy as np

from . import BUNDLE_PATH

MATERIAL_GRID = (250.0, 1700.0)


def build() -> dict[str, np.ndarray]:
    from ..colour import spectra
    from ..optics import catalogue, materials

    out: dict[str, np.ndarray] = {}
    for name in spectra.light_names():
        light = spectra._named_light_live(name.upper(), "build")
        out[f"light/{light.name}"] = light.power
    for name in spectra.detector_names():
        out[f"detector/{name}"] = spectra._named_detector_live(name).curves
    for name, (kind, *_rest) in catalogue.BUILTIN_MATERIALS.items():
        if not kind.startswith("db"):
            continue
        mat = materials._builtin_live(name)
        lo = max(np.ceil(mat.range_nm[0]), MATERIAL_GRID[0])
        hi = min(np.floor(mat.range_nm[1]), MATERIAL_GRID[1])
        wl = np.arange(lo, hi + 0.5, 1.0)
        nk = mat.index(wl)
        out[f"material/{name}"] = np.stack([wl, nk.real, nk.imag], axis=-1)
    return out


def main() -> None:
    data = build()
    np.savez_compressed(BUNDLE_PATH, **data)
    print(f"wrote {BUNDLE_PATH} ({len(data)} arrays)")


if __name__ == "__main__":
    main()
