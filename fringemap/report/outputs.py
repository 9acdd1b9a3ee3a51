"""The files ``fringemap map`` writes for one photo, written all-or-nothing.

For a photo ``<stem>`` in folder ``DIR``:

* ``<stem>.thickness.tif`` — float32 thickness (nm), NaN where unmeasured;
  the TIFF description holds JSON with the recipe, units and software version;
* ``<stem>.confidence.tif`` — float32, 0-1;
* ``<stem>.reasons.tif`` — uint8 reason codes (:data:`fringemap.result.REASONS`);
* ``<stem>.map.png`` — a heat map with a colour bar in nm;
* ``<stem>.stats.json`` — statistics with units in the key names, reason counts,
  provenance and warnings.

Every file is first written under a temporary name in ``DIR`` and renamed only
when all of them are complete, so a failure leaves no partial output.
"""

from __future__ import annotations

import contextlib
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np

from .. import __version__
from ..result import REASONS, ThicknessMap

__all__ = ["output_paths", "write_map_outputs", "stats_document"]

SUFFIXES = {
    "thickness": ".thickness.tif",
    "confidence": ".confidence.tif",
    "reasons": ".reasons.tif",
    "map": ".map.png",
    "stats": ".stats.json",
}


def output_paths(out_dir: str | Path, stem: str) -> dict[str, Path]:
    """The paths ``write_map_outputs`` will write, by kind."""
    out = Path(out_dir)
    return {kind: out / f"{stem}{suffix}" for kind, suffix in SUFFIXES.items()}


def _description(result: ThicknessMap, what: str, unit: str) -> dict:
    return {
        "content": what,
        "unit": unit,
        "software": f"fringemap {__version__}",
        "source": result.source,
        "recipe": result.recipe.to_dict(),
        "recipe_hash": result.recipe.hash,
        "colour_table": result.provenance.get("colour_table"),
    }


def stats_document(result: ThicknessMap, extra: dict | None = None) -> dict:
    """The JSON document of ``<stem>.stats.json``."""
    doc = {
        "software": f"fringemap {__version__}",
        "source": result.source,
        "recipe_hash": result.recipe.hash,
        "image_height_px": int(result.shape[0]),
        "image_width_px": int(result.shape[1]),
        **result.stats.to_dict(),
        "reason_counts_px": result.reason_counts(),
        "reason_codes": {str(k): v for k, v in REASONS.items()},
        "warnings": list(result.warnings),
        "provenance": result.provenance,
        "recipe": result.recipe.to_dict(),
    }
    if extra:
        doc.update(extra)
    return doc


def write_map_outputs(
    result: ThicknessMap,
    out_dir: str | Path,
    stem: str,
    *,
    extra_stats: dict | None = None,
    scale_px_per_mm: float | None = None,
) -> dict[str, Path]:
    """Write the five per-photo outputs (see the module docstring); all or nothing.

    The statistics file also holds the analysis of :mod:`fringemap.report.analysis`
    (key ``"analysis"``); with sites or profiles in the recipe's ``[report]``,
    ``<stem>.sites.csv``, ``<stem>.profiles.csv`` and ``<stem>.profiles.png`` are
    written too. Returns the paths written, by kind.
    """
    from ..io.write import atomic_path, write_float_tiff, write_json, write_uint8_tiff
    from .analysis import analyse, optional_output_paths
    from .analysis_files import write_optional_outputs
    from .figures import draw_thickness_map

    analysis = analyse(result, result.recipe)
    if scale_px_per_mm is None and analysis.settings.scale is not None:
        scale_px_per_mm = analysis.settings.scale.px_per_mm
    extra_stats = {"analysis": analysis.to_dict(), **(extra_stats or {})}
    paths = output_paths(out_dir, stem)
    paths.update(optional_output_paths(analysis.settings, out_dir, stem, include_report=False))
    with contextlib.ExitStack() as stack:
        tmp = {kind: stack.enter_context(atomic_path(p)) for kind, p in paths.items()}

        def write_tiffs():
            write_float_tiff(
                tmp["thickness"],
                result.thickness_nm.astype(np.float32, copy=False),
                description=_description(result, "film thickness", "nm"),
                compress=False,  # measured floats barely compress (see write_float_tiff)
            )
            write_float_tiff(
                tmp["confidence"],
                result.confidence.astype(np.float32, copy=False),
                description=_description(result, "confidence", "1 (0-1)"),
            )
            write_uint8_tiff(
                tmp["reasons"],
                result.reasons.astype(np.uint8, copy=False),
                description={
                    **_description(result, "reason codes", "code"),
                    "codes": {str(k): v for k, v in REASONS.items()},
                },
            )

        # the TIFFs compress (outside the GIL) while the figure is drawn; an error in
        # either is raised here, and the ExitStack then removes every temporary file
        pool = stack.enter_context(ThreadPoolExecutor(max_workers=1))
        tiffs = pool.submit(write_tiffs)
        name = Path(result.source).name if result.source else stem
        draw_thickness_map(
            result.thickness_nm,
            tmp["map"],
            title=f"{name}: film thickness",
            scale_px_per_mm=scale_px_per_mm,
        )
        write_json(tmp["stats"], stats_document(result, extra_stats))
        write_optional_outputs(analysis, result, tmp)
        tiffs.result()
    return paths
