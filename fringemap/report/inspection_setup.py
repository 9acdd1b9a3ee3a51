"""Report tables about how a photo was measured: set-up, provenance, reasons, problems.

Part of the inspection report's content (see
:mod:`fringemap.report.inspection_content`).
"""

from __future__ import annotations

from ..result import REASONS
from .analysis import Analysis
from .inspection_content import Table, count, pct

__all__ = ["reason_table", "setup_table", "provenance_table", "problem_text"]

#: What to try when many pixels of the ROI carry a reason (shown when nothing was measured).
_HINTS = {
    "no-film": "a large dark area: background, or holes in the film",
    "saturated": "clipped colours: lower the exposure",
    "too-dark": "too little light: raise the exposure or the lighting",
    "off-model": "colours the stack cannot show: check film, substrate, light and camera",
    "ambiguous-order": "fringe order undecided: add an --anchor of known thickness",
    "beyond-range": "film thicker than white light resolves, or outside the search --range",
}


def reason_table(result) -> Table:
    counts = result.reason_counts()
    total = max(result.reasons.size, 1)
    roi_px = max(total - counts.get("outside-roi", 0), 1)
    rows = []
    for code, name in REASONS.items():
        n = counts.get(name, 0)
        share_roi = "" if name == "outside-roi" else pct(n / roi_px, 1)
        rows.append((str(code), name, count(n), pct(n / total, 1), share_roi))
    return Table(
        "Pixels by reason",
        ("Code", "Reason", "Pixels", "Of the image", "Of the ROI"),
        tuple(rows),
        ("r", "l", "r", "r", "r"),
    )


def _describe_material(v) -> str:
    return f"n = {v:g}" if isinstance(v, int | float) else str(v)


def setup_table(result, photo) -> Table:
    r = result.recipe
    g = r.get
    layers = g("stack", "layers")
    layer_text = ", ".join(f"{_describe_material(m)} {d:g} nm" for m, d in layers) or "none"
    sub_t = g("stack", "substrate_thickness_nm")
    lo, hi = g("search", "range_nm")
    anchors = ", ".join(g("measure", "anchors")) or "none"
    rows = [
        ("Film", _describe_material(g("stack", "film"))),
        (
            "Substrate",
            _describe_material(g("stack", "substrate"))
            + ("" if sub_t is None else f" ({sub_t / 1e6:g} mm thick, incoherent)"),
        ),
        ("Ambient medium", _describe_material(g("stack", "ambient"))),
        ("Fixed layers under the film", layer_text),
        ("Light source", str(g("light", "source"))),
        ("Angle of incidence", f"{g('light', 'angle_deg'):g}°"),
        ("Lens aperture (NA)", f"{g('light', 'aperture'):g}"),
        ("Camera sensor", str(g("camera", "sensor"))),
        ("Camera calibration", g("camera", "calibration") or "none (uncorrected camera colours)"),
        ("Thickness search", f"{lo:g}\u2013{hi:g} nm in {g('search', 'step_nm'):g} nm steps"),
        ("Region of interest", str(g("measure", "roi"))),
        ("Anchors (x,y = nm)", anchors),
        ("Recipe", f"{r.source or 'built from options'} (hash {r.hash})"),
    ]
    if photo is not None:
        h, w = photo.shape
        rows.append(
            (
                "Photo",
                f"{photo.path or 'in-memory array'}: {w} × {h} px, "
                f"{photo.bit_depth}-bit, {photo.encoding} encoding",
            )
        )
        facts = [photo.camera, photo.datetime_original]
        md = photo.metadata or {}
        if md.get("exposure_time_s"):
            facts.append(f"{md['exposure_time_s']:g} s")
        if md.get("f_number"):
            facts.append(f"f/{md['f_number']:g}")
        if md.get("iso"):
            facts.append(f"ISO {md['iso']:g}")
        facts = [str(f) for f in facts if f]
        if facts:
            rows.append(("Camera and exposure", ", ".join(facts)))
    return Table(
        "Film stack, light, camera and calibration", ("Item", "Value"), tuple(rows), ("l", "l")
    )


def _flatten(prefix: str, value, out: list) -> None:
    if isinstance(value, dict):
        for k, v in value.items():
            _flatten(f"{prefix}.{k}" if prefix else str(k), v, out)
        return
    if isinstance(value, list | tuple) and value and isinstance(value[0], dict):
        for i, v in enumerate(value[:5]):
            _flatten(f"{prefix}[{i}]", v, out)
        return
    if isinstance(value, float):
        text = f"{value:.6g}"
    elif isinstance(value, list | tuple):
        items = [f"{v:.6g}" if isinstance(v, float) else str(v) for v in value[:8]]
        text = ", ".join(items) + (f", … ({len(value)} in all)" if len(value) > 8 else "")
    else:
        text = str(value)
    text = text or "none"
    out.append((prefix, text if len(text) <= 140 else text[:137] + "…"))


def provenance_table(result) -> Table:
    rows: list = []
    _flatten("", result.provenance, rows)
    return Table(
        "How the numbers were made (provenance)", ("Item", "Value"), tuple(rows), ("l", "l")
    )


def problem_text(result, analysis: Analysis) -> str | None:
    if analysis.evaluation.stats.count_px:
        return None
    counts = result.reason_counts()
    roi_px = max(result.reasons.size - counts.get("outside-roi", 0), 1)
    parts = []
    for name, n in sorted(counts.items(), key=lambda kv: -kv[1]):
        if name in ("outside-roi", "measured") or n == 0:
            continue
        hint = _HINTS.get(name, "")
        parts.append(f"{name} {100 * n / roi_px:.0f} % ({hint})" if hint else name)
    why = "; ".join(parts[:3]) or "no pixel of the region has a usable colour"
    return (
        "Nothing was measured in the evaluation area, so the statistics below are empty and "
        f"no verdict is given. Pixels of the ROI: {why}."
    )
