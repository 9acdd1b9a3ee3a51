"""The recipe: everything that says how a photo is to be measured, as TOML data.

A recipe file is data only (TOML, never executed). Command-line options
override its values. Unknown sections or keys are errors that name the key,
so a misspelling never passes silently. Example::

    [stack]
    film = "sio2"            # built-in name, number, cauchy:/sellmeier:, db:..., or CSV
    substrate = "si"
    ambient = "air"
    layers = [{material = "si3n4", thickness_nm = 50.0}]   # fixed layers under the film

    [light]
    source = "F11"           # CIE name, blackbody:3200, 589, 546/10, or CSV
    angle_deg = 0.0
    aperture = 0.0           # numerical aperture of the lens (0 = one angle)

    [camera]
    sensor = "cie1931"       # cie1931, cie1964, camera-a, camera-b, or CSV
    calibration = ""         # a camera file from `fringemap calibrate`

    [search]
    range_nm = [0.0, 1500.0]
    step_nm = 1.0

    [measure]
    roi = "all"              # all, rect:X0,Y0,X1,Y1, circle:CX,CY,R, mask:PATH
    anchors = ["120,40=25"]  # X,Y=NM points of known thickness
"""

from __future__ import annotations

import hashlib
import json
import math
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from .errors import InputFileError, OptionError

__all__ = ["Recipe", "load_recipe", "SCHEMA"]


def _str(v, key):
    if not isinstance(v, str):
        raise OptionError(f"expected a string, got {type(v).__name__} {v!r}", where=key)
    return v


def _num(lo=-math.inf, hi=math.inf, lo_open=False, hi_open=False):
    def check(v, key):
        if isinstance(v, bool) or not isinstance(v, int | float):
            raise OptionError(f"expected a number, got {type(v).__name__} {v!r}", where=key)
        v = float(v)
        if not math.isfinite(v):
            raise OptionError(f"expected a finite number, got {v!r}", where=key)
        if v < lo or v > hi or (lo_open and v == lo) or (hi_open and v == hi):
            lo_b = "(" if lo_open else "["
            hi_b = ")" if hi_open else "]"
            raise OptionError(f"must be in {lo_b}{lo:g}, {hi:g}{hi_b}, got {v:g}", where=key)
        return v

    return check


def _material(v, key):
    if isinstance(v, bool):
        raise OptionError(f"expected a material, got {v!r}", where=key)
    if isinstance(v, int | float):
        return _num(0, math.inf, lo_open=True)(v, key)
    return _str(v, key)


def _range(v, key):
    if isinstance(v, str):
        parts = v.split(":")
        if len(parts) != 2:
            raise OptionError(f"expected MIN:MAX in nm, got {v!r}", where=key)
        try:
            v = [float(p) for p in parts]
        except ValueError:
            raise OptionError(f"expected MIN:MAX in nm, got {v!r}", where=key) from None
    if not isinstance(v, list | tuple) or len(v) != 2:
        raise OptionError(f"expected [MIN, MAX] in nm, got {v!r}", where=key)
    lo, hi = (_num(0)(x, key) for x in v)
    if hi <= lo:
        raise OptionError(f"range MIN must be below MAX, got {lo:g}:{hi:g}", where=key)
    return (lo, hi)


def _layers(v, key):
    if not isinstance(v, list):
        raise OptionError(f"expected a list of {{material, thickness_nm}}, got {v!r}", where=key)
    out = []
    for i, item in enumerate(v):
        k = f"{key}[{i}]"
        if isinstance(item, str):  # "MAT:NM"
            mat, sep, nm = item.rpartition(":")
            if not sep:
                raise OptionError(f"expected MATERIAL:THICKNESS_NM, got {item!r}", where=k)
            try:
                thick = float(nm)
            except ValueError:
                raise OptionError(f"thickness must be a number, got {nm!r}", where=k) from None
            out.append((mat, _num(0)(thick, k)))
            continue
        if not isinstance(item, dict) or set(item) != {"material", "thickness_nm"}:
            raise OptionError("each layer needs exactly material and thickness_nm", where=k)
        out.append(
            (
                _material(item["material"], k + ".material"),
                _num(0)(item["thickness_nm"], k + ".thickness_nm"),
            )
        )
    return tuple(out)


def _str_list(v, key):
    if isinstance(v, str):
        return (v,)
    if not isinstance(v, list | tuple) or not all(isinstance(x, str) for x in v):
        raise OptionError(f"expected a list of strings, got {v!r}", where=key)
    return tuple(v)


def _opt_num(check):
    def f(v, key):
        return None if v is None else check(v, key)

    return f


def _bool(v, key):
    if not isinstance(v, bool):
        raise OptionError(f"expected true or false, got {v!r}", where=key)
    return v


# section -> key -> (validator, default)
SCHEMA: dict[str, dict[str, tuple[Any, Any]]] = {
    "stack": {
        "film": (_material, None),
        "substrate": (_material, None),
        "ambient": (_material, "air"),
        "layers": (_layers, ()),
        "substrate_thickness_nm": (_opt_num(_num(0, lo_open=True)), None),
    },
    "light": {
        "source": (_str, "D65"),
        "angle_deg": (_num(0, 90, hi_open=True), 0.0),
        "aperture": (_num(0, 1, hi_open=True), 0.0),
    },
    "camera": {
        "sensor": (_str, "cie1931"),
        "calibration": (_str, ""),
    },
    "search": {
        "range_nm": (_range, (0.0, 1500.0)),
        "step_nm": (_num(0.05, 50), 1.0),
    },
    "measure": {
        "roi": (_str, "all"),
        "anchors": (_str_list, ()),
        "thicker_at": (_str_list, ()),
    },
    "report": {
        # the report stage parses these texts (fringemap.report.settings); the recipe
        # checks their types, so it needs to know nothing of the stages after it
        "spec": (_str, ""),
        "scale_px_per_mm": (_opt_num(_num(0, lo_open=True)), None),
        "scale_points": (_str, ""),
        "edge_exclusion_mm": (_num(0), 0.0),
        "sites": (_opt_num(_num(1, 49)), None),
        "profiles": (_str_list, ()),
        "regions": (_str_list, ()),
        "write_report": (_bool, False),
    },
}


@dataclass(frozen=True)
class Recipe:
    """A validated recipe: ``values[section][key]`` for every key in :data:`SCHEMA`.

    Use :meth:`get`, :meth:`with_overrides`; ``source`` is the recipe file, if any.
    """

    values: dict = field(default_factory=dict)
    source: str | None = None
    #: keys set by :meth:`with_overrides` (command-line options), so errors in values
    #: from the recipe file name the file and key, and errors in options the option
    overridden: frozenset = field(default=frozenset(), compare=False, repr=False)

    @classmethod
    def from_dict(cls, data: dict, *, source: str | None = None) -> Recipe:
        """Validate a nested dict (as read from TOML) and fill in defaults."""
        where = source or "recipe"
        if not isinstance(data, dict):
            raise OptionError("a recipe must be a table of sections", where=where)
        values = {s: {k: d for k, (_, d) in keys.items()} for s, keys in SCHEMA.items()}
        for section, content in data.items():
            if section not in SCHEMA:
                raise OptionError(
                    f"unknown section [{section}] (known: {', '.join(SCHEMA)})", where=where
                )
            if not isinstance(content, dict):
                raise OptionError(f"[{section}] must be a table", where=where)
            for key, v in content.items():
                if key not in SCHEMA[section]:
                    known = ", ".join(SCHEMA[section])
                    raise OptionError(
                        f"unknown key {section}.{key} (known in [{section}]: {known})",
                        where=where,
                    )
                check, _ = SCHEMA[section][key]
                try:
                    values[section][key] = check(v, f"{section}.{key}")
                except OptionError as exc:
                    if source and exc.where and not exc.where.startswith(source):
                        exc.where = f"{source}: {exc.where}"  # the file and the key
                    raise
        return cls(values=values, source=source)

    def get(self, section: str, key: str):
        """The value of ``section.key``."""
        return self.values[section][key]

    def with_overrides(self, overrides: dict[str, Any]) -> Recipe:
        """A new recipe with ``{"section.key": value}`` overrides (None = keep)."""
        data = {s: dict(v) for s, v in self.values.items()}
        changed = set(self.overridden)
        for dotted, v in overrides.items():
            if v is None:
                continue
            section, key = dotted.split(".")
            check, _ = SCHEMA[section][key]
            data[section][key] = check(v, dotted)
            changed.add(dotted)
        return replace(self, values=data, overridden=frozenset(changed))

    def label(self, dotted: str, option: str) -> str:
        """Where an error in the value of ``dotted`` is: ``option`` when it was given
        as an option (or there is no recipe file), else ``FILE: section.key``."""
        if self.source and dotted not in self.overridden:
            return f"{self.source}: {dotted}"
        return option

    def require_stack(self) -> None:
        """Raise OptionError unless film and substrate are set."""
        for key in ("film", "substrate"):
            if self.values["stack"][key] is None:
                raise OptionError(
                    f"no {key} given: use --{key} MATERIAL or set stack.{key} in a recipe",
                    where=f"--{key}",
                )

    def to_dict(self) -> dict:
        """JSON-ready nested dict."""
        return json.loads(json.dumps(self.values, default=list))

    def to_toml(self) -> str:
        """The recipe as TOML text (round-trips through :func:`load_recipe`)."""
        lines = []
        for section, content in self.to_dict().items():
            lines.append(f"[{section}]")
            for key, v in content.items():
                if v is None:
                    continue
                if key == "layers":
                    v = [{"material": m, "thickness_nm": d} for m, d in v]
                    items = ", ".join(
                        "{material = " + json.dumps(x["material"]) + f", thickness_nm = "
                        f"{x['thickness_nm']!r}" + "}"
                        for x in v
                    )
                    lines.append(f"{key} = [{items}]")
                else:
                    lines.append(f"{key} = {json.dumps(v)}")
            lines.append("")
        return "\n".join(lines)

    @property
    def hash(self) -> str:
        """A short hash of the recipe's values (records which recipe made an output)."""
        blob = json.dumps(self.to_dict(), sort_keys=True).encode()
        return hashlib.sha256(blob).hexdigest()[:16]

    # -- building the physics objects ---------------------------------------------------

    def stack(self):
        """The :class:`~fringemap.optics.stack.Stack` this recipe describes."""
        from .optics.stack import Stack

        self.require_stack()
        s = self.values["stack"]
        try:
            return Stack.from_names(
                film=s["film"],
                substrate=s["substrate"],
                ambient=s["ambient"],
                layers=s["layers"],
                substrate_thickness_nm=s["substrate_thickness_nm"],
            )
        except OptionError as exc:
            keys = {f"--{k}": f"stack.{k}" for k in ("film", "substrate", "ambient")}
            keys["stack.layers"] = "stack.layers"
            if exc.where in keys:
                dotted = keys[exc.where]
                exc.where = self.label(dotted, "--layer" if dotted == "stack.layers" else exc.where)
            raise

    def light(self):
        """The light (:class:`~fringemap.colour.spectra.Light`)."""
        from .colour.spectra import parse_light

        where = self.label("light.source", "--light")
        return parse_light(self.values["light"]["source"], where=where)

    def detector(self):
        """The detector (:class:`~fringemap.colour.spectra.Detector`)."""
        from .colour.spectra import parse_detector

        return parse_detector(
            self.values["camera"]["sensor"], where=self.label("camera.sensor", "--sensor")
        )

    def colour_table(self):
        """The colour table for this recipe (see :func:`fringemap.colour.table.build_colour_table`)."""
        from .colour.table import build_colour_table

        return build_colour_table(
            self.stack(),
            light=self.light(),
            detector=self.detector(),
            angle_deg=self.values["light"]["angle_deg"],
            thickness_range_nm=self.values["search"]["range_nm"],
            step_nm=self.values["search"]["step_nm"],
            numerical_aperture=self.values["light"]["aperture"],
        )


def load_recipe(path: str | Path | None) -> Recipe:
    """Read and validate a TOML recipe (or the defaults when ``path`` is None)."""
    if path is None:
        return Recipe.from_dict({})
    p = Path(path)
    if p.is_dir():
        raise InputFileError("is a folder; give the path of a TOML recipe file", where=str(p))
    if not p.is_file():
        raise InputFileError("recipe file not found; check the file name and folder", where=str(p))
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except UnicodeDecodeError as exc:
        raise OptionError(
            f"recipe is not UTF-8 text (byte 0x{exc.object[exc.start]:02x} at offset "
            f"{exc.start}); save it as UTF-8",
            where=str(p),
        ) from None
    except OSError as exc:
        raise InputFileError(
            f"recipe cannot be read ({exc.strerror or type(exc).__name__})", where=str(p)
        ) from None
    except tomllib.TOMLDecodeError as exc:
        raise OptionError(f"not valid TOML: {exc}", where=str(p)) from None
    return Recipe.from_dict(data, source=str(p))
