"""The camera model: a colour correction, how it was made, and its camera file (TOML).

A :class:`CameraModel` maps a photo's linear, white-balanced RGB to the
colour table's matching space (:mod:`fringemap.calibration.common`). Its
camera file is TOML, written here (the standard library reads TOML but does
not write it) and read back with :mod:`tomllib`::

    format = "fringemap-camera"
    format_version = 1
    method = "finlayson2015"
    terms = "root-polynomial-2"
    matrix = [[...], [...], [...]]      # 3 rows of T numbers
    light = "FL11"
    sensor = "cie1931"
    ...
    [residuals]
    mean_delta_e2000 = 0.62
    ...

The string ``"self"`` in place of a camera file asks the pipeline to
calibrate the camera from the photo itself (:data:`SELF_CALIBRATION`).
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import FringemapWarning, InputFileError, OptionError
from .methods import TERMS, expand_terms

__all__ = [
    "CameraModel",
    "save_camera_model",
    "load_camera_model",
    "camera_model_toml",
    "SelfCalibrationRequest",
    "SELF_CALIBRATION",
    "MODEL_METHODS",
    "FORMAT",
    "FORMAT_VERSION",
    "recipe_mismatches",
]

FORMAT = "fringemap-camera"
FORMAT_VERSION = 1

#: how a model can have been made: the chart fits, reference-disc gains, self-calibration
MODEL_METHODS = ("cheung2004", "finlayson2015", "reference-gains", "self-gains", "self-matrix")

_CHUNK_PX = 1 << 20  # pixels corrected per step (bounds the memory of the term expansion)


@dataclass(frozen=True, eq=False)
class CameraModel:
    """A camera colour correction into the colour table's matching space.

    Attributes
    ----------
    method : str
        How it was made, one of :data:`MODEL_METHODS`.
    matrix : ndarray of shape (3, T)
        The correction acting on the terms ``terms`` of a linear colour.
    terms : str
        ``"linear"`` (T = 3) or ``"root-polynomial-2"`` (T = 6), see
        :func:`fringemap.calibration.methods.expand_terms`.
    light : str
        The light it was made under (a name :func:`~fringemap.colour.spectra.parse_light` reads).
    sensor : str
        The detector of the matching space it maps into (the recipe's ``camera.sensor``).
    source : str or None
        The photo it was made from.
    created : str
        ISO 8601 date and time it was made.
    mean_delta_e, max_delta_e : float
        Mean and largest CIEDE2000 residual over the patches (NaN when none).
    per_patch : tuple of (str, float)
        Patch (or reference area) name and its CIEDE2000 residual.
    leave_one_out : dict of str to float
        Mean leave-one-out CIEDE2000 per method tried (chart fits).
    notes : str
        Free text (excluded patches, convergence...).
    """

    method: str
    matrix: np.ndarray
    terms: str = "linear"
    light: str = ""
    sensor: str = "cie1931"
    source: str | None = None
    created: str = field(default_factory=lambda: _dt.datetime.now().isoformat(timespec="seconds"))
    mean_delta_e: float = math.nan
    max_delta_e: float = math.nan
    per_patch: tuple[tuple[str, float], ...] = ()
    leave_one_out: dict = field(default_factory=dict)
    notes: str = ""

    def __post_init__(self):
        if self.method not in MODEL_METHODS:
            raise OptionError(
                f"expected a method among {', '.join(MODEL_METHODS)}, got {self.method!r}",
                where="method",
            )
        if self.terms not in TERMS:
            raise OptionError(
                f"expected terms {' or '.join(TERMS)}, got {self.terms!r}", where="terms"
            )
        m = np.array(self.matrix, dtype=np.float64)
        if m.shape != (3, TERMS[self.terms]) or not np.all(np.isfinite(m)):
            raise OptionError(
                f"expected a finite (3, {TERMS[self.terms]}) matrix for terms {self.terms!r}, "
                f"got shape {m.shape}",
                where="matrix",
            )
        m.flags.writeable = False
        object.__setattr__(self, "matrix", m)

    @property
    def is_diagonal(self) -> bool:
        """True for per-channel gains (a linear matrix with zero off-diagonal entries)."""
        return self.terms == "linear" and bool(np.all(self.matrix[~np.eye(3, dtype=bool)] == 0))

    @property
    def gains(self) -> np.ndarray | None:
        """The per-channel gains (3,) of a diagonal model, else None."""
        return np.diag(self.matrix).copy() if self.is_diagonal else None

    def apply(self, linear: np.ndarray) -> np.ndarray:
        """Correct linear RGB (..., 3) into the matching space (..., 3).

        float32 input gives float32 output, anything else float64. Works in
        chunks, so a large photo needs little extra memory.
        """
        arr = np.asarray(linear)
        if arr.ndim < 1 or arr.shape[-1] != 3:
            raise OptionError(
                f"expected colours of shape (..., 3), got {arr.shape}", where="linear"
            )
        dtype = np.float32 if arr.dtype == np.float32 else np.float64
        flat = arr.reshape(-1, 3).astype(dtype, copy=False)
        out = np.empty(flat.shape, dtype=dtype)
        m = self.matrix.T.astype(dtype)
        for i in range(0, flat.shape[0], _CHUNK_PX):
            out[i : i + _CHUNK_PX] = expand_terms(flat[i : i + _CHUNK_PX], self.terms) @ m
        return out.reshape(arr.shape)

    def summary(self) -> str:
        """One line: method, residuals, light and sensor."""
        res = (
            f"mean/max dE2000 {self.mean_delta_e:.2f}/{self.max_delta_e:.2f}"
            if math.isfinite(self.mean_delta_e)
            else "no residuals"
        )
        return f"{self.method} ({self.terms}), {res}, light {self.light}, sensor {self.sensor}"


class SelfCalibrationRequest:
    """Marker: calibrate the camera from the photo being measured (``camera.calibration = "self"``).

    Not a correction itself: :func:`fringemap.job.run_job` and
    :func:`fringemap.calibration.self_calibrate` act on it.
    """

    _instance = None

    def __new__(cls):
        if cls._instance is None:
            cls._instance = super().__new__(cls)
        return cls._instance

    def __repr__(self) -> str:
        return "SELF_CALIBRATION"

    def apply(self, linear):
        raise OptionError(
            "'self' asks for self-calibration: use fringemap.calibration.self_calibrate "
            "(or run_job) to make the correction before measuring",
            where="camera.calibration",
        )


#: the marker :func:`load_camera_model` returns for ``"self"``
SELF_CALIBRATION = SelfCalibrationRequest()


# ------------------------------------------------------------------------------ TOML


def _toml(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int | np.integer):
        return str(int(v))
    if isinstance(v, float | np.floating):
        v = float(v)
        return (
            "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf") if math.isinf(v) else repr(v)
        )
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)  # a JSON string is a TOML basic string
    if isinstance(v, list | tuple | np.ndarray):
        return "[" + ", ".join(_toml(x) for x in v) + "]"
    raise TypeError(f"cannot write {type(v).__name__} as TOML")  # pragma: no cover


def camera_model_toml(model: CameraModel) -> str:
    """The camera file text of ``model`` (round-trips through :func:`load_camera_model`)."""
    lines = [
        "# fringemap camera model: a colour correction into the colour table's matching space",
        f"format = {_toml(FORMAT)}",
        f"format_version = {FORMAT_VERSION}",
        f"method = {_toml(model.method)}",
        f"terms = {_toml(model.terms)}",
        "matrix = [",
        *(f"    {_toml(row.tolist())}," for row in model.matrix),
        "]",
        f"light = {_toml(model.light)}",
        f"sensor = {_toml(model.sensor)}",
        f"source = {_toml(model.source or '')}",
        f"created = {_toml(model.created)}",
        f"notes = {_toml(model.notes)}",
        "",
        "[residuals]",
        f"mean_delta_e2000 = {_toml(model.mean_delta_e)}",
        f"max_delta_e2000 = {_toml(model.max_delta_e)}",
        f"patch_names = {_toml([n for n, _ in model.per_patch])}",
        f"patch_delta_e2000 = {_toml([float(d) for _, d in model.per_patch])}",
        "",
        "[residuals.leave_one_out]",
        *(f"{k} = {_toml(float(v))}" for k, v in model.leave_one_out.items()),
        "",
    ]
    return "\n".join(lines)


def save_camera_model(model: CameraModel, path: str | Path) -> Path:
    """Write ``model`` as a TOML camera file (atomically); returns the path."""
    from ..io.write import write_text

    if not isinstance(model, CameraModel):
        raise OptionError(f"expected a CameraModel, got {type(model).__name__}", where="model")
    return write_text(path, camera_model_toml(model))


def _get(doc: dict, key: str, kind, where: str, *, table: str = ""):
    name = f"{table}.{key}" if table else key
    if key not in doc:
        raise InputFileError(f"missing key {name!r} (not a complete camera file)", where=where)
    v = doc[key]
    ok = isinstance(v, kind) and not (kind is not bool and isinstance(v, bool))
    if not ok:
        want = {str: "a string", list: "a list", dict: "a table"}.get(kind, "a number")
        raise InputFileError(
            f"key {name!r}: expected {want}, got {type(v).__name__} {v!r}"[:160], where=where
        )
    return v


def _numbers(v, name: str, where: str) -> list[float]:
    if not all(isinstance(x, int | float) and not isinstance(x, bool) for x in v):
        raise InputFileError(
            f"key {name!r}: expected a list of numbers, got {v!r}"[:160], where=where
        )
    return [float(x) for x in v]


def load_camera_model(path: str | Path) -> CameraModel | SelfCalibrationRequest:
    """Read a TOML camera file, or return :data:`SELF_CALIBRATION` for the string ``"self"``.

    Raises
    ------
    InputFileError
        The file is missing, not UTF-8 TOML, of another format or a newer
        version, or a key is missing or of the wrong type (the message names it).
    """
    if isinstance(path, str) and path.strip().lower() == "self":
        return SELF_CALIBRATION
    where = str(path)
    p = Path(path)
    if not p.is_file():
        raise InputFileError(
            "camera file not found (make one with `fringemap calibrate`)", where=where
        )
    try:
        doc = tomllib.loads(p.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise InputFileError("camera file is not UTF-8 text (damaged?)", where=where) from None
    except tomllib.TOMLDecodeError as exc:
        raise InputFileError(f"camera file is not valid TOML ({exc})", where=where) from None
    except OSError as exc:
        raise InputFileError(f"cannot read the camera file ({exc.strerror})", where=where) from None
    fmt = _get(doc, "format", str, where)
    if fmt != FORMAT:
        raise InputFileError(f"key 'format': expected {FORMAT!r}, got {fmt!r}", where=where)
    version = _get(doc, "format_version", int, where)
    if version > FORMAT_VERSION or version < 1:
        raise InputFileError(
            f"key 'format_version': this fringemap reads 1-{FORMAT_VERSION}, got {version}",
            where=where,
        )
    method = _get(doc, "method", str, where)
    if method not in MODEL_METHODS:
        raise InputFileError(
            f"key 'method': expected one of {', '.join(MODEL_METHODS)}, got {method!r}", where=where
        )
    terms = _get(doc, "terms", str, where)
    if terms not in TERMS:
        raise InputFileError(
            f"key 'terms': expected {' or '.join(TERMS)}, got {terms!r}", where=where
        )
    rows = _get(doc, "matrix", list, where)
    n = TERMS[terms]
    if len(rows) != 3 or not all(isinstance(r, list) and len(r) == n for r in rows):
        raise InputFileError(
            f"key 'matrix': expected 3 rows of {n} numbers for terms {terms!r}", where=where
        )
    matrix = np.array([_numbers(r, "matrix", where) for r in rows])
    if not np.all(np.isfinite(matrix)):
        raise InputFileError("key 'matrix': expected finite numbers, got NaN or inf", where=where)
    res = _get(doc, "residuals", dict, where)
    names = _get(res, "patch_names", list, where, table="residuals")
    des = _numbers(
        _get(res, "patch_delta_e2000", list, where, table="residuals"),
        "residuals.patch_delta_e2000",
        where,
    )
    if len(names) != len(des) or not all(isinstance(x, str) for x in names):
        raise InputFileError(
            "keys 'residuals.patch_names' and 'residuals.patch_delta_e2000': expected lists of "
            f"names and numbers of equal length, got {len(names)} and {len(des)}",
            where=where,
        )
    loo = res.get("leave_one_out", {})
    if not isinstance(loo, dict):
        raise InputFileError("key 'residuals.leave_one_out': expected a table", where=where)
    source = _get(doc, "source", str, where)
    return CameraModel(
        method=method,
        matrix=matrix,
        terms=terms,
        light=_get(doc, "light", str, where),
        sensor=_get(doc, "sensor", str, where),
        source=source or None,
        created=_get(doc, "created", str, where),
        mean_delta_e=float(_get(res, "mean_delta_e2000", float | int, where, table="residuals")),
        max_delta_e=float(_get(res, "max_delta_e2000", float | int, where, table="residuals")),
        per_patch=tuple(zip(names, des, strict=True)),
        leave_one_out={
            k: x
            for k, x in zip(
                loo, _numbers(list(loo.values()), "residuals.leave_one_out", where), strict=True
            )
        },
        notes=str(doc.get("notes", "")),
    )


def recipe_mismatches(model, recipe) -> list[str]:
    """Why ``model`` does not fit ``recipe`` (another light or sensor): one sentence each.

    Emits each as a :class:`~fringemap.errors.FringemapWarning` as well.
    """
    import warnings

    from ..colour.spectra import parse_detector, parse_light

    if not isinstance(model, CameraModel):
        return []
    out = []
    want_light = parse_light(recipe.get("light", "source"), where="--light").name
    try:
        have_light = parse_light(model.light, where="camera.light").name if model.light else ""
    except OptionError:
        have_light = model.light
    if have_light and have_light != want_light:
        out.append(
            f"the camera correction was made under light {have_light}, the recipe's light is "
            f"{want_light}: colours may be off; calibrate under the light you measure with"
        )
    want_sensor = parse_detector(recipe.get("camera", "sensor"), where="--sensor").name
    if model.sensor and model.sensor != want_sensor:
        out.append(
            f"the camera correction maps into sensor {model.sensor}'s colours, the recipe's "
            f"sensor is {want_sensor}: use the same --sensor for calibrate and map"
        )
    for text in out:
        warnings.warn(text, FringemapWarning, stacklevel=2)
    return out
