"""Many photos, one recipe: local worker processes or a Dask cluster, resume, summaries.

:func:`collect_inputs` turns files, folders and glob patterns into a sorted
list of photos; :func:`run_batch` measures them all with one colour table and
writes, in the output folder, every photo's own outputs (see
:mod:`fringemap.report.outputs`) plus ``batch-summary.csv`` and
``batch-summary.json``: one row per photo with its status (``ok``,
``failed`` or ``skipped``), the reason for a failure and the main statistics.

The colour table is built once. Local workers are separate processes that
receive it (pickled) once each, when they start; on a cluster
(:mod:`fringemap.cluster`) it is sent to every worker once. Results come back
as small :class:`~fringemap.job.JobOutcome` records while the maps go
straight to disk, so memory does not grow with the number of photos. A photo
that cannot be read or measured is recorded as failed and the batch goes on;
a worker process that dies is replaced, and the photo that killed it is
recorded as failed.

With ``resume=True`` a photo is skipped when all its outputs exist and its
``<stem>.stats.json`` records the hash of the current recipe
(:attr:`fringemap.recipe.Recipe.hash`) and the same source file; its row then
carries the statistics recorded in that file, so an interrupted and resumed
batch has the same summary numbers as one that ran straight through.
"""

from __future__ import annotations

import multiprocessing
import os
import pickle
import re
import signal
import sys
import threading
import time
from collections import deque
from collections.abc import Callable, Iterable, Sequence
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from datetime import UTC, datetime
from pathlib import Path

from . import __version__
from .batch_summary import (
    SUMMARY_COLUMNS,
    SUMMARY_CSV,
    SUMMARY_JSON,
    BatchSummary,
    SummaryWriter,
    recorded_stats,
    remove_stale_partials,
    summary_row,
)
from .errors import InputFileError, OptionError
from .io.photo import RAW_EXTENSIONS
from .job import JobOutcome, MapJob, load_camera_for, run_job
from .report.outputs import SUFFIXES, output_paths

__all__ = [
    "PHOTO_SUFFIXES",
    "SUMMARY_CSV",
    "SUMMARY_JSON",
    "SUMMARY_COLUMNS",
    "BatchSummary",
    "collect_inputs",
    "batch_stems",
    "default_workers",
    "measure_one",
    "run_batch",
]

#: File name endings taken as photos when scanning folders and glob patterns.
PHOTO_SUFFIXES = frozenset({".png", ".jpg", ".jpeg", ".jpe", ".jfif", ".tif", ".tiff"}) | (
    RAW_EXTENSIONS
)

# files fringemap writes itself (maps, figures, simulator truth): never taken as photos
_OWN_ENDINGS = tuple(SUFFIXES.values()) + (".profiles.png", ".truth.tif")
_OWN_NAMES = frozenset({"series.png", "kymograph.png", "kymograph.tif"})
_MAGIC = re.compile(r"[*?\[]")


# --------------------------------------------------------------------- inputs


def _is_photo_name(path: Path) -> bool:
    name = path.name
    if name.startswith("."):
        return False
    lower = name.lower()
    if lower in _OWN_NAMES or lower.endswith(_OWN_ENDINGS):
        return False
    return path.suffix.lower() in PHOTO_SUFFIXES


def _listing_error(folder: str, exc: OSError) -> InputFileError:
    why = exc.strerror or type(exc).__name__
    return InputFileError(
        f"folder cannot be listed ({why}); check that it exists and that you may read it",
        where=folder,
    )


def _scan_folder(folder: str, recursive: bool) -> list[Path]:
    found: list[Path] = []
    if not recursive:
        try:
            with os.scandir(folder) as entries:
                for entry in entries:
                    if entry.is_file() and _is_photo_name(Path(entry.path)):
                        found.append(Path(entry.path))
        except OSError as exc:
            raise _listing_error(folder, exc) from exc
        return found

    def fail(exc: OSError) -> None:
        raise _listing_error(exc.filename or folder, exc)

    for root, dirs, files in os.walk(folder, onerror=fail):
        dirs[:] = sorted(d for d in dirs if not d.startswith("."))
        found += [Path(root, f) for f in files if _is_photo_name(Path(root, f))]
    return found


def collect_inputs(inputs: Iterable[str | os.PathLike[str]], *, recursive: bool) -> list[Path]:
    """The photos named by files, folders and glob patterns, sorted and without repeats.

    Parameters
    ----------
    inputs : iterable of str or path-like
        A file is taken as given, whatever its name (a file that is missing
        or not a photo becomes a failed row of the batch, not an error here).
        A folder contributes the photo files in it (PNG, JPEG, TIFF and camera
        raw, by name ending, see :data:`PHOTO_SUFFIXES`), with ``recursive``
        those of its sub-folders too; hidden files and folders and files
        fringemap itself writes (``*.thickness.tif``, ``*.map.png``...,
        ``*.truth.tif``) are left out. A pattern with ``*``, ``?`` or ``[``
        contributes the photo files it matches (``**`` matches sub-folders
        with ``recursive``).
    recursive : bool
        Also scan the sub-folders of folders.

    Returns
    -------
    list of pathlib.Path
        Sorted by path text; a file reached twice (also through a link) is
        listed once.

    Raises
    ------
    InputFileError
        A folder cannot be listed, or nothing at all was found.
    """
    items = [os.fspath(item) for item in inputs]
    found: list[Path] = []
    for text in items:
        if _MAGIC.search(text):
            import glob

            for match in glob.glob(text, recursive=recursive):
                p = Path(match)
                if p.is_dir():
                    found += _scan_folder(match, recursive)
                elif p.is_file() and _is_photo_name(p):
                    found.append(p)
        elif os.path.isdir(text):
            found += _scan_folder(text, recursive)
        else:
            found.append(Path(text))
    unique: dict[str, Path] = {}
    for p in sorted(found, key=str):
        unique.setdefault(os.path.normcase(os.path.realpath(p)), p)
    if not unique:
        shown = ", ".join(items[:3]) + (" ..." if len(items) > 3 else "")
        hint = "" if recursive else " (add --recursive to look into sub-folders)"
        raise InputFileError(
            f"no photos found (PNG, JPEG, TIFF or camera raw){hint}", where=shown or "inputs"
        )
    return sorted(unique.values(), key=str)


def batch_stems(paths: Sequence[Path]) -> list[str]:
    """Output stems, unique within the batch and stable for a given set of photos.

    A photo's stem is its file name without the extension. Photos that would
    share a stem get the names of their parent folders prepended, one more
    level at a time (``a/img.jpg``, ``b/img.jpg`` -> ``a_img``, ``b_img``);
    any stems still equal (``img.jpg`` and ``img.png`` in one folder) are
    numbered in path order (``img``, ``img-1``).
    """
    n = len(paths)
    base = [p.stem for p in paths]
    parents = [Path(os.path.abspath(p)).parts[1:-1] for p in paths]
    names = list(base)
    depth = [0] * n
    while True:
        groups: dict[str, list[int]] = {}
        for i, name in enumerate(names):
            groups.setdefault(name, []).append(i)
        grown = False
        for members in groups.values():
            # a longer name helps only photos whose folders differ
            if len(members) < 2 or len({parents[i] for i in members}) < 2:
                continue
            for i in members:
                if depth[i] < len(parents[i]):
                    depth[i] += 1
                    names[i] = "_".join((*parents[i][-depth[i] :], base[i]))
                    grown = True
        if not grown:
            break
    seen: dict[str, int] = {}
    out = []
    for name in names:
        if name in seen:
            seen[name] += 1
            name = f"{name}-{seen[name]}"
        else:
            seen[name] = 0
        out.append(name)
    return out


def default_workers() -> int:
    """Worker processes of a local batch: the CPUs this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


# --------------------------------------------------------------------- one photo


def _crash_outcome(path: str, stem: str, text: str) -> JobOutcome:
    return JobOutcome(path=path, stem=stem, status="failed", reason=f"{path}: {text}", exit_code=1)


def measure_one(path: str, stem: str, job: MapJob, *, table, camera) -> JobOutcome:
    """:func:`fringemap.job.run_job`, with any unexpected error also returned as a failure."""
    try:
        return run_job(path, stem, job, table=table, camera=camera)
    except Exception as exc:  # a bug or a resource problem: record it, go on with the batch
        text = " ".join(str(exc).split())
        return _crash_outcome(path, stem, f"internal error ({type(exc).__name__}: {text})")


_WORKER: dict = {}


def _stop_worker(signum, frame) -> None:
    raise SystemExit(128 + signum)  # unwinds, so files being written are cleaned up


def _watch_parent(parent_pid: int) -> None:
    """Stop this worker when the batch process that started it is gone (killed).

    SIGTERM makes the main thread unwind (removing a file being written); the
    pool catches that exception around a task, so it is sent until the
    process has gone, and the process is ended after 10 s in any case.
    """
    while os.getppid() == parent_pid:
        time.sleep(0.5)
    for _ in range(20):
        os.kill(os.getpid(), signal.SIGTERM)
        time.sleep(0.5)
    os._exit(1)


def _init_worker(table_blob: bytes, camera_blob: bytes, threads: int, parent_pid: int) -> None:
    """Start of a local worker process: keep the shared table and camera for every photo.

    ``threads`` is this worker's share of the CPUs for the pipeline's parallel
    loops, so that the workers together do not oversubscribe the machine. A
    worker whose parent dies (e.g. killed with SIGKILL) stops by itself,
    removing the temporary file it was writing.
    """
    from ._memory import keep_freed_memory

    keep_freed_memory()  # each photo reuses the previous one's memory
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent handles Ctrl-C
    signal.signal(signal.SIGTERM, _stop_worker)
    threading.Thread(target=_watch_parent, args=(parent_pid,), daemon=True).start()
    try:
        import numba

        numba.set_num_threads(max(1, min(threads, numba.config.NUMBA_NUM_THREADS)))
    except (ImportError, ValueError):  # pragma: no cover - numba is a dependency
        pass
    _WORKER["table"] = pickle.loads(table_blob)
    _WORKER["camera"] = pickle.loads(camera_blob)


def _worker_task(path: str, stem: str, job: MapJob) -> JobOutcome:
    return measure_one(path, stem, job, table=_WORKER["table"], camera=_WORKER["camera"])


_DIED = "the worker process measuring it stopped unexpectedly (out of memory?)"


def _run_local(tasks, job: MapJob, table, camera, workers: int, done: Callable) -> None:
    """Measure ``tasks`` ((path, stem) pairs) in ``workers`` processes; ``done(outcome)`` each.

    At most two photos per worker are queued at a time. When a worker process
    dies, the pool is replaced and the photos that were in flight are measured
    again one at a time, so the photo that kills a worker is identified and
    recorded as failed while the others complete.
    """
    if workers <= 1:
        for path, stem in tasks:
            done(measure_one(path, stem, job, table=table, camera=camera))
        return
    threads = max(1, default_workers() // workers)
    initargs = (pickle.dumps(table), pickle.dumps(camera), threads, os.getpid())
    context = multiprocessing.get_context("spawn")
    queue = deque(tasks)
    suspects: deque = deque()
    while queue or suspects:
        pool = ProcessPoolExecutor(
            max_workers=workers, mp_context=context, initializer=_init_worker, initargs=initargs
        )
        pending: dict = {}
        broken = False
        try:
            while (queue or suspects or pending) and not broken:
                if suspects:
                    if not pending:
                        task = suspects.popleft()
                        pending[pool.submit(_worker_task, *task, job)] = (task, True)
                else:
                    while queue and len(pending) < 2 * workers:
                        task = queue.popleft()
                        pending[pool.submit(_worker_task, *task, job)] = (task, False)
                finished, _ = wait(pending, return_when=FIRST_COMPLETED)
                for future in finished:
                    task, alone = pending.pop(future)
                    exc = future.exception()
                    if exc is None:
                        done(future.result())
                    elif isinstance(exc, BrokenProcessPool):
                        broken = True
                        if alone:
                            done(_crash_outcome(*task, _DIED))
                        else:
                            suspects.append(task)
                    else:
                        text = f"internal error ({type(exc).__name__}: {exc})"
                        done(_crash_outcome(*task, text))
            suspects.extend(task for task, _ in pending.values())
        finally:
            pool.shutdown(wait=True, cancel_futures=True)


# --------------------------------------------------------------------- the batch


def run_batch(
    inputs: Sequence[str | os.PathLike[str]],
    job: MapJob,
    *,
    workers: int | None = None,
    resume: bool = False,
    scheduler: str | None = None,
    progress: bool = True,
) -> BatchSummary:
    """Measure every photo of ``inputs`` with ``job`` and write the batch summary.

    Parameters
    ----------
    inputs : sequence of str or path-like
        The photos, e.g. from :func:`collect_inputs` (in the order the
        summary lists them). Output stems come from :func:`batch_stems`.
    job : MapJob
        Recipe, output folder (created if needed) and optional outputs.
    workers : int, optional
        Local worker processes, >= 1 (default :func:`default_workers`; 1
        measures in this process). Ignored with ``scheduler``.
    resume : bool
        Skip photos already measured with this recipe (see the module
        docstring); photos that failed before are tried again.
    scheduler : str, optional
        Address of a Dask scheduler (``tcp://HOST:PORT``) to run on a cluster
        instead of local processes; inputs and output folder must be on
        storage every worker sees under the same paths.
    progress : bool
        Show a progress bar with the expected time left on stderr.

    Returns
    -------
    BatchSummary

    Raises
    ------
    OptionError
        Bad ``workers``, recipe or scheduler (unreachable, no workers, another
        fringemap version on the workers).
    OutputError
        The output folder cannot be written, or an output name would
        overwrite an input.
    """
    from tqdm import tqdm

    from .io.write import check_no_clash, check_output_dir
    from .report.analysis import optional_output_paths
    from .report.settings import check_report_settings

    start = time.perf_counter()
    if workers is None:
        workers = default_workers()
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise OptionError(
            f"expected a whole number of workers >= 1, got {workers!r}", where="--workers"
        )
    if scheduler:
        from .cluster import parse_address

        scheduler = parse_address(scheduler)
    photos = [os.path.abspath(os.fspath(p)) for p in inputs]
    shown = [os.fspath(p) for p in inputs]
    stems = batch_stems([Path(p) for p in photos])
    job.recipe.require_stack()
    out = check_output_dir(job.out_dir, inputs=photos)
    job = MapJob(recipe=job.recipe, out_dir=out.absolute(), report=job.report)
    settings = check_report_settings(job.recipe)
    report = job.report or settings.write_report
    optional = {
        s: tuple(optional_output_paths(settings, out, s, include_report=report).values())
        for s in stems
    }
    planned = [p for s in stems for p in (*output_paths(out, s).values(), *optional[s])]
    check_no_clash([*planned, out / SUMMARY_CSV, out / SUMMARY_JSON], photos)
    remove_stale_partials(out)
    recipe_hash = job.recipe.hash
    meta = {
        "software": f"fringemap {__version__}",
        "started_utc": datetime.now(UTC).isoformat(timespec="seconds"),
        "out_dir": str(out),
        "recipe_hash": recipe_hash,
        "recipe": job.recipe.to_dict(),
        "resume": bool(resume),
        "workers": 0 if scheduler else workers,
        "scheduler": scheduler,
    }
    summary = SummaryWriter(out, len(photos), meta)
    index = {(p, s): i for i, (p, s) in enumerate(zip(photos, stems, strict=True))}
    todo = []
    for i, (path, stem) in enumerate(zip(photos, stems, strict=True)):
        doc = recorded_stats(path, stem, out, recipe_hash, also=optional[stem]) if resume else None
        if doc is None:
            todo.append((path, stem))
        else:
            reason = f"outputs of recipe {recipe_hash} already present"
            summary.rows[i] = summary_row(shown[i], stem, "skipped", reason, doc, 0.0)
    skipped = len(photos) - len(todo)
    table = camera = client = None
    if todo:  # settings errors first, then a cluster that does not answer: before any photo
        table = job.recipe.colour_table()
        camera = load_camera_for(job.recipe)
        if scheduler:
            from .cluster import connect

            client = connect(scheduler)
    bar = tqdm(
        total=len(photos),
        initial=skipped,
        desc="batch",
        unit="photo",
        disable=not progress or not todo,
        file=sys.stderr,
        dynamic_ncols=True,
    )
    failed = 0

    def done(outcome: JobOutcome) -> None:
        nonlocal failed
        i = index[(outcome.path, outcome.stem)]
        row = summary_row(
            shown[i],
            outcome.stem,
            outcome.status,
            outcome.reason,
            outcome.summary,
            outcome.seconds,
        )
        summary.set(i, row)
        if outcome.status == "failed":
            failed += 1
            bar.set_postfix(failed=failed, refresh=False)
        bar.update(1)

    try:
        if client is not None:
            from .cluster import run_on_cluster

            run_on_cluster(client, todo, job, table, camera, done)
        elif todo:
            _run_local(todo, job, table, camera, min(workers, len(todo)), done)
    finally:
        bar.close()
        if client is not None:
            client.close()
        seconds = time.perf_counter() - start
        summary.write(complete=all(r is not None for r in summary.rows), seconds=seconds)
    return BatchSummary(
        rows=tuple(summary.rows),
        seconds=seconds,
        workers=0 if scheduler else workers,
        scheduler=scheduler,
        csv_path=summary.csv_path,
        json_path=summary.json_path,
    )
