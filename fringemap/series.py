"""Time series: film thickness over time, from a sequence of photos or a video.

Every frame is measured with one colour table and the recipe's region of
interest. Outputs, in the output folder:

* ``series.csv`` — one row per measured frame in time order: ``time_s``,
  ``frame``, ``source``, then ``mean_nm``, ``median_nm``, ``std_nm``,
  ``min_nm``, ``max_nm`` and ``coverage`` (0-1) over the region of interest;
* ``series.json`` — the thinning (< 0) or growth (> 0) rate of the region's
  mean thickness, nm/s, from an ordinary least-squares line through
  (time, mean), its standard error and R², the time basis and the frames
  that failed;
* ``series.png`` — the region's mean against time with the fitted line;
* ``kymograph.tif`` (float32 nm, one row per frame, one column per px
  along the profile line; the description lists the times) and
  ``kymograph.png`` (distance in px across, time in s downwards).

Frame times, for photos (``time_from="auto"`` tries them in this order):

1. ``exif`` — EXIF DateTimeOriginal (1 s resolution), when every frame has
   one and they are not all equal; times count from the earliest frame;
2. ``name`` — a time in every file name, all of one kind: a date and clock
   time such as ``20250301-101500`` (counted from the earliest frame) or an
   elapsed time such as ``film_t12.5s.jpg`` (taken as it is); the forms are
   listed in :mod:`fringemap.timeline`;
3. ``interval`` — frame ``i`` of the file names in natural order (``f2``
   before ``f10``) is at ``i * interval`` s.

A video's frame ``n`` is at ``n / fps`` s (or ``n * interval`` s when an
interval is given); every ``video_step``-th frame is measured.
"""

from __future__ import annotations

import contextlib
import math
import os
import sys
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import __version__
from .errors import FringemapError, InputFileError, MeasurementError, OptionError
from .timeline import RateFit, exif_time, fit_rate, natural_key, time_from_name
from .timeline import name_times as photo_name_times

__all__ = [
    "VIDEO_SUFFIXES",
    "TIME_BASES",
    "SeriesResult",
    "run_series",
]

#: File name endings read as videos.
VIDEO_SUFFIXES = frozenset({".avi", ".mp4", ".mov", ".mkv", ".m4v", ".webm", ".mpg", ".mpeg"})

#: Time bases for photos: ``auto`` tries ``exif``, then ``name``, then ``interval``.
TIME_BASES = ("auto", "exif", "name", "interval")

#: Output files, by kind.
OUTPUT_NAMES = {
    "csv": "series.csv",
    "json": "series.json",
    "plot": "series.png",
    "kymograph": "kymograph.tif",
    "kymograph_plot": "kymograph.png",
}
_CSV_COLUMNS = (
    "time_s",
    "frame",
    "source",
    "mean_nm",
    "median_nm",
    "std_nm",
    "min_nm",
    "max_nm",
    "coverage",
)


# ------------------------------------------------------------------------ frames


def _video_frames(path: Path, step: int, interval: float | None) -> Iterator[tuple]:
    """(frame number, time s, Photo, total kept or None) for every ``step``-th frame."""
    import cv2

    from .io import photo_from_array

    where = str(path)
    if not path.is_file():
        raise InputFileError("does not exist; check the file name and folder", where=where)
    # the video decoder's own log lines (e.g. "moov atom not found") would break the
    # one-line error; read when the decoder starts, so set before the first capture
    os.environ.setdefault("OPENCV_FFMPEG_LOGLEVEL", "-8")
    cap = cv2.VideoCapture(where)
    try:
        if not cap.isOpened():
            raise InputFileError(
                "cannot be opened as a video (unknown container or codec, or damaged); convert "
                "it to an MJPG AVI or H.264 MP4, or save its frames as photos",
                where=where,
            )
        fps = float(cap.get(cv2.CAP_PROP_FPS) or 0.0)
        if interval is None and not (math.isfinite(fps) and fps > 0):
            raise OptionError(
                f"the video {where} does not give its frame rate; give --interval S (seconds "
                "between its frames)",
                where="--interval",
            )
        dt_s = interval if interval is not None else 1.0 / fps
        count = int(cap.get(cv2.CAP_PROP_FRAME_COUNT) or 0)
        total = (count + step - 1) // step if count > 0 else None
        n = kept = 0
        while True:
            if n % step:
                if not cap.grab():
                    break
            else:
                ok, bgr = cap.read()
                if not ok:
                    break
                rgb = cv2.cvtColor(bgr, cv2.COLOR_BGR2RGB)
                kept += 1
                yield n, n * dt_s, photo_from_array(rgb, encoding="srgb"), total
            n += 1
        if not kept:
            raise InputFileError("holds no frame that can be decoded", where=where)
    finally:
        cap.release()


@dataclass(frozen=True)
class SeriesResult:
    """What :func:`run_series` found and wrote.

    Attributes
    ----------
    time_s : ndarray of shape (N,)
        Times of the measured frames, s, increasing.
    mean_nm : ndarray of shape (N,)
        The region's mean thickness per frame, nm.
    fit : RateFit
        The rate of the mean thickness, nm/s.
    time_basis : str
        ``exif``, ``name``, ``interval``, ``video-fps`` or ``video-interval``.
    failed : tuple of (str, str)
        Frames that could not be read or measured: (source, reason).
    written : dict
        Paths written, by kind.
    """

    time_s: np.ndarray
    mean_nm: np.ndarray
    fit: RateFit
    time_basis: str
    failed: tuple[tuple[str, str], ...]
    written: dict


def _profile_line(recipe, shape, line) -> tuple[tuple[float, float], tuple[float, float]]:
    from .roi import parse_segment

    if line is not None:
        return line
    profiles = recipe.get("report", "profiles")
    if profiles:
        return parse_segment(profiles[0], "report.profiles")
    h, w = shape
    return (0.0, float(h // 2)), (float(w - 1), float(h // 2))


def _collect(inputs) -> tuple[Path | None, list[Path]]:
    """(the video, or None; the photos in natural name order)."""
    from .batch import collect_inputs

    items = [Path(os.fspath(p)) for p in inputs]
    videos = [p for p in items if p.suffix.lower() in VIDEO_SUFFIXES]
    if videos:
        if len(items) != 1:
            raise OptionError(
                f"expected one video, or photos only, got {len(items)} inputs with "
                f"{len(videos)} video(s)",
                where=str(videos[0]),
            )
        return videos[0], []
    return None, sorted(collect_inputs(items, recursive=False), key=natural_key)


def _cell(value) -> str:
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    text = str(value)
    if any(c in text for c in ',"\n\r'):
        text = '"' + text.replace('"', '""') + '"'
    return text


def _check_options(time_from, interval, video_step) -> None:
    if time_from not in TIME_BASES:
        raise OptionError(
            f"expected one of {', '.join(TIME_BASES)}, got {time_from!r}", where="--time-from"
        )
    if interval is not None:
        ok = isinstance(interval, int | float) and not isinstance(interval, bool)
        if not ok or not math.isfinite(interval) or interval <= 0:
            raise OptionError(f"expected a time > 0 s, got {interval!r}", where="--interval")
    if isinstance(video_step, bool) or not isinstance(video_step, int) or video_step < 1:
        raise OptionError(f"expected a whole number >= 1, got {video_step!r}", where="--video-step")


def _no_times_error() -> OptionError:
    return OptionError(
        "the frames carry no times (no EXIF DateTimeOriginal in every frame, no time such as "
        "20250301-101500 or _t12.5s in every file name); give --interval S",
        where="--interval",
    )


def _photo_times(records, photos, name_times, time_from, interval):
    """(seconds per record, basis, clock start or None) for photo frames."""
    exif = [exif_time(r["exif"]) for r in records]
    if time_from in ("auto", "exif") and records and all(exif):
        start = min(exif)
        if time_from == "exif" or max(exif) > start:
            return [(e - start).total_seconds() for e in exif], "exif", start
    if time_from == "exif":
        missing = next((r["source"] for r, e in zip(records, exif, strict=True) if e is None), None)
        why = f"{missing} has no EXIF DateTimeOriginal" if missing else "no frame was measured"
        raise OptionError(why, where="--time-from")
    if time_from in ("auto", "name") and name_times is not None:
        seconds, start = name_times
        return [seconds[r["index"]] for r in records], "name", start
    if interval is not None:
        return [r["index"] * interval for r in records], "interval", None
    raise _no_times_error()


def run_series(
    inputs: Sequence[str | os.PathLike[str]],
    recipe,
    out_dir: str | os.PathLike[str],
    *,
    profile_line: tuple[tuple[float, float], tuple[float, float]] | None = None,
    interval: float | None = None,
    video_step: int = 1,
    time_from: str = "auto",
    progress: bool = True,
) -> SeriesResult:
    """Measure a sequence of frames and write the series outputs (see the module docstring).

    Parameters
    ----------
    inputs : sequence of str or path-like
        Photos, folders of photos or glob patterns; or one video file
        (:data:`VIDEO_SUFFIXES`).
    recipe : Recipe
        How to measure; its ``measure.roi`` is the region the statistics and
        the rate are computed over.
    out_dir : str or path-like
        Output folder (created if needed).
    profile_line : ((x1, y1), (x2, y2)), optional
        The kymograph's line, px. Default: the recipe's first
        ``report.profiles`` line, else the middle row of the frame.
    interval : float, optional
        Seconds between frames: for photos without EXIF or file-name times,
        and for a video instead of its frame rate.
    video_step : int
        Measure every ``video_step``-th frame of a video (>= 1).
    time_from : {"auto", "exif", "name", "interval"}
        Where photo times come from (``auto``: the first that applies).
    progress : bool
        Show a progress bar on stderr.

    Returns
    -------
    SeriesResult

    Raises
    ------
    OptionError
        Bad options, or no way to know the frames' times.
    InputFileError
        No frames found; a video that cannot be opened.
    MeasurementError
        No frame could be measured.
    OutputError
        An output cannot be written.
    """
    from tqdm import tqdm

    from .io import read_photo
    from .io.write import (
        atomic_path,
        check_no_clash,
        check_output_dir,
        write_float_tiff,
        write_json,
        write_text,
    )
    from .job import load_camera_for
    from .measure import measure
    from .report.series_figures import draw_kymograph, draw_series
    from .stats import profile as sample_profile

    _check_options(time_from, interval, video_step)
    recipe.require_stack()
    video, photos = _collect(inputs)
    sources = [video] if video is not None else photos
    out = check_output_dir(out_dir, inputs=[*(Path(os.fspath(p)) for p in inputs), *sources])
    paths = {kind: out / name for kind, name in OUTPUT_NAMES.items()}
    check_no_clash(paths.values(), sources)
    name_times = None
    if video is not None:
        if time_from not in ("auto", "interval"):
            raise OptionError(
                "a video's frame times come from its frame rate (or --interval)",
                where="--time-from",
            )
    else:
        name_times = photo_name_times(photos)
        if time_from == "name" and name_times is None:
            bad = next((p for p in photos if time_from_name(p.name) is None), photos[0])
            raise OptionError(
                f"{bad.name} has no time in its name (or the names mix kinds of time)",
                where="--time-from",
            )
        if time_from == "interval" and interval is None:
            raise OptionError("--time-from interval needs --interval S", where="--interval")
    table = recipe.colour_table()
    camera = load_camera_for(recipe)

    def frames():
        if video is not None:
            for n, t, photo, total in _video_frames(video, video_step, interval):
                if bar.total is None and total:
                    bar.total = total
                yield n, f"{video}#{n}", t, photo, None
            return
        for i, p in enumerate(photos):
            try:
                yield i, str(p), None, read_photo(p), None
            except FringemapError as exc:
                yield i, str(p), None, None, str(exc)

    total = len(photos) if video is None else None
    bar = tqdm(
        total=total,
        desc="series",
        unit="frame",
        disable=not progress,
        file=sys.stderr,
        dynamic_ncols=True,
    )
    records: list[dict] = []
    failed: list[tuple[str, str]] = []
    line = distance = None
    attempted = unreadable = 0
    try:
        for index, source, t, photo, error in frames():
            attempted += 1
            if error is None:
                if (
                    video is None
                    and not records
                    and time_from == "auto"
                    and name_times is None
                    and interval is None
                    and exif_time(photo.datetime_original) is None
                ):
                    raise _no_times_error()  # known at the first frame: fail before the rest
                try:
                    result = measure(photo, recipe, table=table, camera=camera)
                except FringemapError as exc:
                    error = f"{source}: {exc}" if photo.path is None else str(exc)
            if error is None:
                first = line is None
                if first:
                    line = _profile_line(recipe, result.shape, profile_line)
                try:
                    prof = sample_profile(result.thickness_nm, None, *line)
                except FringemapError as exc:
                    if first:  # the line does not fit the frames: an option error
                        raise
                    error = f"{source}: {exc}"  # a frame of another size
            bar.update(1)
            if error is not None:
                failed.append((source, error))
                unreadable += photo is None
                continue
            if distance is None:
                distance = prof.distance_px
            s = result.stats
            records.append(
                {
                    "index": index,
                    "source": source,
                    "time": t,
                    "exif": photo.datetime_original,
                    "mean_nm": s.mean_nm,
                    "median_nm": s.median_nm,
                    "std_nm": s.std_nm,
                    "min_nm": s.min_nm,
                    "max_nm": s.max_nm,
                    "coverage": s.coverage,
                    "profile": prof.thickness_nm.astype(np.float32),
                }
            )
    finally:
        bar.close()
    if not records:
        first = failed[0][1] if failed else "no frames"
        if failed and unreadable == len(failed):  # not one frame could even be read
            raise InputFileError(
                f"none of the {attempted} frames could be read (first: {first})",
                where=str(sources[0]),
            )
        raise MeasurementError(
            f"none of the {attempted} frames could be measured (first: {first})",
            where=str(sources[0]),
        )
    if video is not None:
        times = [r["time"] for r in records]
        basis, start = ("video-interval" if interval is not None else "video-fps"), None
    else:
        times, basis, start = _photo_times(records, photos, name_times, time_from, interval)
    for r, t in zip(records, times, strict=True):
        r["time"] = float(t)
    records.sort(key=lambda r: (r["time"], r["index"]))
    time_s = np.array([r["time"] for r in records])
    mean = np.array([r["mean_nm"] for r in records], dtype=np.float64)
    std = np.array([r["std_nm"] for r in records], dtype=np.float64)
    fit = fit_rate(time_s, mean)

    lines = [",".join(_CSV_COLUMNS)]
    for r in records:
        row = [r["time"], r["index"], r["source"]] + [float(r[k]) for k in _CSV_COLUMNS[3:]]
        lines.append(",".join(_cell(v) for v in row))
    kymo = np.stack([r["profile"] for r in records])
    (x1, y1), (x2, y2) = line
    title = Path(os.fspath(sources[0])).name if video is not None else f"{len(records)} frames"
    trend = None
    if math.isfinite(fit.rate_nm_per_s):
        trend = (
            "thinning" if fit.rate_nm_per_s < 0 else "growth" if fit.rate_nm_per_s > 0 else "steady"
        )
    doc = {
        "software": f"fringemap {__version__}",
        "recipe_hash": recipe.hash,
        "quantity": "mean film thickness over the region of interest, nm, against time, s",
        "roi": recipe.get("measure", "roi"),
        "time_basis": basis,
        "start_time": start.isoformat() if start is not None else None,
        **{k: v for k, v in fit.to_dict().items() if k != "n"},
        "fit_frames": fit.n,
        "trend": trend,
        "frames": attempted,
        "frames_measured": len(records),
        "video_step": video_step if video is not None else None,
        "profile": {"start_xy_px": [x1, y1], "end_xy_px": [x2, y2], "samples": int(kymo.shape[1])},
        "failed_frames": [{"source": s, "reason": r} for s, r in failed],
        "outputs": {k: str(v) for k, v in paths.items()},
        "recipe": recipe.to_dict(),
    }
    # all the files or none: each is written under a temporary name, renamed at the end
    with contextlib.ExitStack() as stack:
        tmp = {kind: stack.enter_context(atomic_path(p)) for kind, p in paths.items()}
        write_text(tmp["csv"], "\n".join(lines) + "\n")
        write_float_tiff(
            tmp["kymograph"],
            kymo,
            description={
                "content": "film thickness along the profile line (columns) against time (rows)",
                "unit": "nm",
                "software": f"fringemap {__version__}",
                "recipe_hash": recipe.hash,
                "profile_start_xy_px": [x1, y1],
                "profile_end_xy_px": [x2, y2],
                "column_distance_px": [float(distance[0]), float(distance[-1])],
                "row_time_s": [float(v) for v in time_s],
            },
        )
        draw_kymograph(
            kymo,
            time_s,
            distance,
            tmp["kymograph_plot"],
            title=f"{title}: thickness along ({x1:g}, {y1:g})-({x2:g}, {y2:g})",
        )
        draw_series(time_s, mean, std, tmp["plot"], title=f"{title}: mean over the region", fit=fit)
        write_json(tmp["json"], doc)
    return SeriesResult(
        time_s=time_s, mean_nm=mean, fit=fit, time_basis=basis, failed=tuple(failed), written=paths
    )
