"""The ``[report]`` settings of a recipe: validated, parsed and checked against a photo.

Recipe keys (all optional; the command-line options of ``fringemap map`` set
the same keys, see :mod:`fringemap.cli.report_options`):

======================  ==================================  =========================
key                     value                               option
======================  ==================================  =========================
``spec``                ``"TARGET±TOL"`` in nm              ``--spec``
``scale_px_per_mm``     pixels per mm, > 0                  ``--scale``
``scale_points``        ``"X1,Y1:X2,Y2=MM"``                ``--scale-points``
``edge_exclusion_mm``   band at the ROI edge left out, mm   ``--edge-exclusion``
``sites``               1, 5, 9 or 49 (circle ROI only)     ``--sites``
``profiles``            ``["X1,Y1:X2,Y2", ...]`` in px      ``--profile``
``regions``             extra ROIs, same forms as ``roi``   ``--region``
``write_report``        true: HTML and PDF report           ``--report``
======================  ==================================  =========================

The ``check_*`` functions are the recipe's validators (``fringemap.recipe``
calls them lazily); :meth:`ReportSettings.from_recipe` parses the values and
cross-checks them (an edge exclusion needs a scale, sites need a circle ROI),
and :meth:`ReportSettings.check_image` checks what depends on the photo's size.
"""

from __future__ import annotations

import contextlib
import math
from collections.abc import Iterator
from dataclasses import dataclass

from ..errors import InputFileError, OptionError
from ..geometry import Scale, check_segment, parse_scale_points
from ..roi import CircleRoi, Roi, parse_roi, parse_segment, roi_mask
from ..sites import SITE_LAYOUTS
from ..stats import Spec, parse_spec

__all__ = [
    "ReportSettings",
    "check_spec",
    "check_scale_points",
    "check_sites",
    "check_profiles",
    "check_regions",
    "check_bool",
    "relabel",
    "check_report_settings",
]

#: two scales (from ``scale_px_per_mm`` and ``scale_points``) agree within this share
SCALE_AGREEMENT = 0.005


@contextlib.contextmanager
def relabel(where: str) -> Iterator[None]:
    """Re-raise an :class:`OptionError` (or the :class:`InputFileError` of a mask image)
    from the block as naming ``where``."""
    try:
        yield
    except (OptionError, InputFileError) as exc:
        raise type(exc)(exc.message, where=where) from None


def _where(recipe, key: str, option: str) -> str:
    """What an error in ``report.KEY`` names: the option when it was typed, else the
    recipe file and key (or the key alone, for a recipe made in code)."""
    dotted = f"report.{key}"
    if dotted in getattr(recipe, "overridden", ()):
        return option
    return recipe.label(dotted, dotted)


# ---------------------------------------------------------------- recipe validators


def check_spec(value, key: str) -> str:
    """Validate ``report.spec``: empty or ``TARGET±TOL`` (nm); returns the stripped text."""
    if not isinstance(value, str):
        raise OptionError(f"expected a string TARGET±TOL, got {value!r}", where=key)
    text = value.strip()
    if text:
        with relabel(key):
            parse_spec(text)
    return text


def check_scale_points(value, key: str) -> str:
    """Validate ``report.scale_points``: empty or ``X1,Y1:X2,Y2=MM``."""
    if not isinstance(value, str):
        raise OptionError(f"expected a string X1,Y1:X2,Y2=MM, got {value!r}", where=key)
    text = value.strip()
    if text:
        parse_scale_points(text, where=key)
    return text


def check_sites(value, key: str) -> int | None:
    """Validate ``report.sites``: None or one of the site counts of :data:`SITE_LAYOUTS`."""
    known = ", ".join(str(k) for k in SITE_LAYOUTS)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise OptionError(f"expected a site count of {known}, got {value!r}", where=key)
    if not (math.isfinite(value) and float(value).is_integer() and int(value) in SITE_LAYOUTS):
        raise OptionError(f"expected a site count of {known}, got {value!r}", where=key)
    return int(value)


def _strings(value, key: str, what: str) -> tuple[str, ...]:
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list | tuple) or not all(isinstance(v, str) for v in value):
        raise OptionError(f"expected a list of {what} strings, got {value!r}", where=key)
    return tuple(v.strip() for v in value)


def check_profiles(value, key: str) -> tuple[str, ...]:
    """Validate ``report.profiles``: a list of ``X1,Y1:X2,Y2`` segments (px)."""
    texts = _strings(value, key, "X1,Y1:X2,Y2")
    for i, text in enumerate(texts):
        parse_segment(text, f"{key}[{i}]")
    return texts


def check_regions(value, key: str) -> tuple[str, ...]:
    """Validate ``report.regions``: a list of ROI texts (forms of ``--roi``)."""
    texts = _strings(value, key, "ROI")
    for i, text in enumerate(texts):
        with relabel(f"{key}[{i}]"):
            parse_roi(text)
    return texts


def check_bool(value, key: str) -> bool:
    """Validate a true/false recipe value."""
    if not isinstance(value, bool):
        raise OptionError(f"expected true or false, got {value!r}", where=key)
    return value


# ------------------------------------------------------------------ parsed settings


@dataclass(frozen=True)
class ReportSettings:
    """The ``[report]`` settings of a recipe, parsed.

    Attributes
    ----------
    roi_text : str
        The recipe's ``measure.roi``.
    roi : Roi
        That region, parsed.
    spec : Spec or None
        Target and tolerance, nm.
    scale : Scale or None
        Pixels per mm.
    scale_source : str
        ``"scale_points"``, ``"scale_px_per_mm"`` or ``""`` (no scale).
    scale_points : str
        The ``X1,Y1:X2,Y2=MM`` text the scale came from, if any.
    edge_exclusion_mm : float
        Width of the band along the ROI edge left out of the evaluation, mm.
    sites : int or None
        Number of measurement sites (circle ROI only).
    profiles : tuple
        ``((x1, y1), (x2, y2))`` segments in px, one per profile.
    regions : tuple
        ``(name, text, Roi)`` of each extra region, named R1, R2, ...
    write_report : bool
        Whether the HTML and PDF report is asked for.
    """

    roi_text: str
    roi: Roi
    spec: Spec | None
    scale: Scale | None
    scale_source: str
    scale_points: str
    edge_exclusion_mm: float
    sites: int | None
    profiles: tuple[tuple[tuple[float, float], tuple[float, float]], ...]
    regions: tuple[tuple[str, str, Roi], ...]
    write_report: bool

    @property
    def edge_exclusion_px(self) -> float:
        """The edge exclusion in px (0 without a scale)."""
        if self.scale is None:
            return 0.0
        return self.edge_exclusion_mm * self.scale.px_per_mm

    @classmethod
    def from_recipe(cls, recipe) -> ReportSettings:
        """Parse and cross-check the ``[report]`` section of a recipe.

        Raises
        ------
        OptionError
            An edge exclusion without a scale (``--edge-exclusion``), sites
            without a circle ROI or an edge exclusion as wide as the circle
            (``--sites``, ``--edge-exclusion``), or two scales that disagree
            by more than 0.5 % (``--scale-points``).
        """
        rep = recipe.values["report"]
        roi_text = recipe.get("measure", "roi")
        with relabel(recipe.label("measure.roi", "--roi")):
            roi = parse_roi(roi_text)
        spec = None
        if rep.get("spec"):
            with relabel(_where(recipe, "spec", "--spec")):
                spec = parse_spec(rep["spec"])
        scale, source = None, ""
        points = rep.get("scale_points", "") or ""
        if rep.get("scale_px_per_mm") is not None:
            scale, source = Scale(rep["scale_px_per_mm"]), "scale_px_per_mm"
        if points:
            from_points = parse_scale_points(
                points, where=_where(recipe, "scale_points", "--scale-points")
            )
            if scale is not None:
                ratio = from_points.px_per_mm / scale.px_per_mm
                if abs(ratio - 1.0) > SCALE_AGREEMENT:
                    raise OptionError(
                        f"the scale from {points!r} ({from_points.px_per_mm:.4g} px/mm) "
                        f"disagrees with scale_px_per_mm ({scale.px_per_mm:.4g} px/mm); "
                        "give only one",
                        where="--scale-points",
                    )
            scale, source = from_points, "scale_points"
        exclusion = float(rep.get("edge_exclusion_mm") or 0.0)
        if exclusion > 0 and scale is None:
            raise OptionError(
                f"an edge exclusion of {exclusion:g} mm needs a scale: "
                "give --scale PX_PER_MM or --scale-points X1,Y1:X2,Y2=MM",
                where="--edge-exclusion",
            )
        sites = rep.get("sites")
        sites = None if sites is None else check_sites(sites, _where(recipe, "sites", "--sites"))
        if sites is not None and not isinstance(roi, CircleRoi):
            raise OptionError(
                f"site layouts need a round wafer: a circle ROI (--roi circle:CX,CY,R), "
                f"got {roi_text!r}",
                where="--sites",
            )
        if isinstance(roi, CircleRoi) and scale is not None:
            excl_px = exclusion * scale.px_per_mm
            if excl_px >= roi.r_px:
                raise OptionError(
                    f"an edge exclusion of {exclusion:g} mm ({excl_px:.1f} px) leaves nothing "
                    f"of the circle ROI of radius {roi.r_px:g} px",
                    where="--edge-exclusion",
                )
        profiles = tuple(
            parse_segment(text, _where(recipe, "profiles", "--profile") + f"[{i}]")
            for i, text in enumerate(rep.get("profiles", ()))
        )
        regions = []
        for i, text in enumerate(rep.get("regions", ())):
            with relabel(_where(recipe, "regions", "--region")):
                regions.append((f"R{i + 1}", text, parse_roi(text)))
        return cls(
            roi_text=roi_text,
            roi=roi,
            spec=spec,
            scale=scale,
            scale_source=source,
            scale_points=points,
            edge_exclusion_mm=exclusion,
            sites=sites,
            profiles=profiles,
            regions=tuple(regions),
            write_report=bool(rep.get("write_report", False)),
        )

    def check_image(self, shape: tuple[int, ...]) -> None:
        """Check the settings that depend on the photo's size ``(H, W)`` in px.

        Raises
        ------
        OptionError
            A profile end point off the image (``--profile``) or an extra
            region with no pixel on it (``--region``).
        """
        for start, end in self.profiles:
            check_segment(start, end, shape, where="--profile")
        for _name, _text, roi in self.regions:
            with relabel("--region"):
                roi_mask(roi, shape)


def check_report_settings(recipe, shape: tuple[int, ...] | None = None) -> ReportSettings:
    """Parse a recipe's ``[report]`` settings and, given the photo's ``(H, W)``, check them.

    Called before measuring, so a bad setting fails fast with one line.
    """
    settings = ReportSettings.from_recipe(recipe)
    if shape is not None:
        settings.check_image(shape)
    return settings
