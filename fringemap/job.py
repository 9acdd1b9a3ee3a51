"""One photo end to end: read, measure, write every output. Shared by map, batch, series.

The recipe says everything about *how* to measure and report (stack, light,
camera, search, region of interest, anchors, spec, scale...); a :class:`MapJob`
adds only *where* outputs go and which optional outputs to write. A failure
is returned as a value (:class:`JobOutcome` with status ``"failed"``), so a
batch can record it and go on.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

from .errors import FringemapError
from .recipe import Recipe

__all__ = ["MapJob", "JobOutcome", "run_job", "load_camera_for"]


@dataclass(frozen=True)
class MapJob:
    """What to do with each photo.

    Attributes
    ----------
    recipe : Recipe
        How to measure (and report).
    out_dir : Path
        Output folder (must exist and be writable).
    report : bool
        Also write the HTML and PDF inspection report.
    """

    recipe: Recipe
    out_dir: Path
    report: bool = False


@dataclass(frozen=True)
class JobOutcome:
    """The outcome of one photo: ``status`` is ``"ok"``, ``"failed"`` or ``"skipped"``."""

    path: str
    stem: str
    status: str
    reason: str = ""
    exit_code: int = 0
    seconds: float = 0.0
    summary: dict = field(default_factory=dict)
    written: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    #: the traceback of a failure (shown with ``--debug``); empty otherwise
    detail: str = ""


def _verdict(stats_path) -> bool | None:
    """Pass (True) / fail (False) against the spec from a written stats.json; None if unjudged."""
    import json

    if not stats_path:
        return None
    try:
        verdict = json.loads(Path(stats_path).read_text(encoding="utf-8"))["analysis"]["verdict"]
    except (OSError, ValueError, KeyError, TypeError):
        return None
    return {"pass": True, "fail": False}.get(verdict)


def load_camera_for(recipe: Recipe):
    """The camera correction named by ``camera.calibration`` (None when empty)."""
    spec = recipe.get("camera", "calibration")
    if not spec:
        return None
    from .calibration import load_camera_model

    return load_camera_model(spec)


def run_job(path: str | Path, stem: str, job: MapJob, *, table=None, camera=None) -> JobOutcome:
    """Measure one photo and write its outputs; never raises a FringemapError.

    Parameters
    ----------
    path : str or Path
        The photo.
    stem : str
        Output file stem.
    job : MapJob
        Settings shared by every photo of the run.
    table : ColourTable, optional
        Prebuilt colour table for ``job.recipe`` (build once per run).
    camera : CameraModel, optional
        Preloaded camera correction (default: from the recipe).
    """
    from .io import read_photo
    from .measure import measure
    from .report.outputs import write_map_outputs
    from .report.settings import check_report_settings

    start = time.perf_counter()
    try:
        photo = read_photo(path)
        settings = check_report_settings(job.recipe, photo.shape)
        if camera is None:
            camera = load_camera_for(job.recipe)
        if camera is not None:  # "self" -> self-calibrate; a model -> check its light
            from dataclasses import replace

            from .calibration import camera_for_photo

            prepared = camera_for_photo(camera, photo, job.recipe, table=table)
            result = measure(photo, job.recipe, table=table, camera=prepared.model)
            result = replace(
                result,
                warnings=tuple(result.warnings) + prepared.warnings,
                provenance={**result.provenance, "camera": prepared.provenance},
            )
        else:
            result = measure(photo, job.recipe, table=table, camera=camera)
        written = write_map_outputs(result, job.out_dir, stem)
        if job.report or settings.write_report:
            from .report.inspection import write_report

            try:
                written.update(write_report(result, photo, job.out_dir, stem))
            except BaseException:
                _remove_quietly(written.values())  # a failed photo leaves none of its outputs
                raise
    except FringemapError as exc:
        import traceback

        return JobOutcome(
            path=str(path),
            stem=stem,
            status="failed",
            reason=str(exc),
            exit_code=exc.exit_code,
            seconds=time.perf_counter() - start,
            detail=traceback.format_exc(),
        )
    s = result.stats
    summary = {
        "mean_nm": s.mean_nm,
        "median_nm": s.median_nm,
        "std_nm": s.std_nm,
        "min_nm": s.min_nm,
        "max_nm": s.max_nm,
        "nonuniformity_percent": s.nonuniformity_percent,
        "coverage": s.coverage,
        "passed": _verdict(written.get("stats")),
        "count_px": s.count_px,
    }
    return JobOutcome(
        path=str(path),
        stem=stem,
        status="ok",
        seconds=time.perf_counter() - start,
        summary=summary,
        written={k: str(v) for k, v in written.items()},
        warnings=tuple(result.warnings),
    )


def _remove_quietly(paths) -> None:
    import os

    for p in paths:
        try:
            os.unlink(p)
        except OSError:
            pass  # already gone: the error that led here is the one to report
