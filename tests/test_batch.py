"""Batches: input collection, failures recorded, resume, a killed run, a Dask cluster.

The photos are small (160 x 160 px) JPEGs of thermal oxide wedges on silicon
rendered by :mod:`fringemap.simulate` (silicon from another published data set
than the recipe's), each wedge offset by 10 nm from the last, plus three
corrupt files: an empty one, a truncated JPEG and a text file named ``.jpg``.
The reference for every comparison is the uninterrupted local run of the
whole folder (``straight_run``): the pipeline is deterministic, so a resumed,
killed-and-resumed or cluster run must give the same numbers exactly.
"""

from __future__ import annotations

import json
import math
import os
import shutil
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest

from fringemap.batch import batch_stems, collect_inputs, run_batch
from fringemap.batch_summary import recorded_stats, remove_stale_partials
from fringemap.cli import main
from fringemap.errors import BatchFailures, InputFileError
from fringemap.job import MapJob
from fringemap.optics.stack import Stack
from fringemap.recipe import Recipe
from fringemap.report.outputs import output_paths
from fringemap.simulate import render_photo, wedge

BIN = Path(sys.executable).parent
OPTIONS = ["--film", "sio2", "--substrate", "si", "--range", "0:1000", "-q"]
N_GOOD = 17
CORRUPT = {"empty": "empty", "cut": "truncated", "notes": "text file"}
NUMBERS = ("mean_nm", "std_nm", "min_nm", "max_nm", "nonuniformity_percent", "coverage", "passed")


@pytest.fixture(scope="module")
def photos(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("photos")
    stack = Stack.from_names(film="sio2", substrate="db:main/Si/Aspnes")
    for i in range(N_GOOD):
        t = wedge((160, 160), t0_nm=150.0 + 10 * i, t1_nm=600.0 + 10 * i)
        sim = render_photo(t, stack=stack, light="D65", jpeg_quality=90, seed=i)
        (folder / f"wafer-{i:02d}.jpg").write_bytes(sim.jpeg_bytes)
    good = (folder / "wafer-00.jpg").read_bytes()
    (folder / "empty.jpg").write_bytes(b"")
    (folder / "cut.jpg").write_bytes(good[: len(good) // 3])
    (folder / "notes.jpg").write_text("exposure log: 1/60 s at f/8\n", encoding="utf-8")
    return folder


def _rows(out: Path) -> dict[str, dict]:
    doc = json.loads((out / "batch-summary.json").read_text(encoding="utf-8"))
    return {r["stem"]: r for r in doc["rows"]}


def _numbers(rows: dict[str, dict]) -> dict[str, tuple]:
    return {stem: tuple(r[k] for k in NUMBERS) for stem, r in rows.items()}


@pytest.fixture(scope="module")
def straight_run(photos, tmp_path_factory):
    """The reference: every photo, two local workers, never interrupted."""
    out = tmp_path_factory.mktemp("straight")
    code = main(["batch", str(photos), "--out", str(out), "--workers", "2", *OPTIONS])
    return code, out, _rows(out)


# ----------------------------------------------------------------------- inputs


def test_collect_inputs_folders_globs_and_repeats(tmp_path):
    (tmp_path / "a" / "deep").mkdir(parents=True)
    for name in (
        "a/x.jpg",
        "a/y.PNG",
        "a/deep/z.tif",
        "a/notes.txt",
        "a/.hidden.jpg",
        "a/x.thickness.tif",
        "a/x.map.png",
        "a/x.truth.tif",
    ):
        (tmp_path / name).write_bytes(b"0")
    folder = tmp_path / "a"
    # compared against: the files written above, by hand
    assert collect_inputs([folder], recursive=False) == [folder / "x.jpg", folder / "y.PNG"]
    assert collect_inputs([folder], recursive=True) == [
        folder / "deep" / "z.tif",
        folder / "x.jpg",
        folder / "y.PNG",
    ]
    both = collect_inputs([folder / "x.jpg", str(folder / "*.jpg"), folder], recursive=False)
    assert both == [folder / "x.jpg", folder / "y.PNG"]  # each photo once
    assert collect_inputs([str(tmp_path / "**" / "*.tif")], recursive=True) == [
        folder / "deep" / "z.tif"
    ]
    # a named file is taken as given (it fails later, as one row of the batch)
    assert collect_inputs([folder / "notes.txt"], recursive=False) == [folder / "notes.txt"]
    with pytest.raises(InputFileError, match="no photos found"):
        collect_inputs([folder / "deep" / "*.jpg"], recursive=False)


def test_collect_inputs_unreadable_folder(tmp_path, monkeypatch):
    def refuse(path):
        raise PermissionError(13, "Permission denied", str(path))

    monkeypatch.setattr(os, "scandir", refuse)
    with pytest.raises(InputFileError, match="cannot be listed .Permission denied"):
        collect_inputs([tmp_path], recursive=False)


def test_stems_unique_and_stable():
    paths = [
        Path("/d/run1/img.jpg"),
        Path("/d/run2/img.jpg"),
        Path("/d/run2/img.png"),
        Path("/d/other.jpg"),
    ]
    # compared against: the naming rule of batch_stems, worked out by hand
    assert batch_stems(paths) == ["run1_img", "run2_img", "run2_img-1", "other"]
    assert batch_stems(paths) == batch_stems(list(paths))


# ----------------------------------------------------------------------- local runs


def test_failures_are_recorded_and_the_batch_goes_on(straight_run, photos):
    code, out, rows = straight_run
    assert code == BatchFailures.exit_code == 6
    statuses = {stem: r["status"] for stem, r in rows.items()}
    assert sum(s == "ok" for s in statuses.values()) == N_GOOD
    for stem, word in CORRUPT.items():
        assert statuses[stem] == "failed"
        assert word in rows[stem]["reason"] and stem in rows[stem]["reason"]
    # compared against: each photo's own <stem>.stats.json
    for stem, r in rows.items():
        if r["status"] != "ok":
            continue
        stats = json.loads(output_paths(out, stem)["stats"].read_text(encoding="utf-8"))
        assert tuple(r[k] for k in NUMBERS) == tuple(stats[k] for k in NUMBERS)
        assert math.isfinite(r["mean_nm"]) and r["coverage"] > 0.9
    csv_lines = (out / "batch-summary.csv").read_text(encoding="utf-8").splitlines()
    assert csv_lines[0].startswith("path,stem,status,reason,mean_nm")
    assert len(csv_lines) == 1 + N_GOOD + len(CORRUPT)


def test_resume_skips_done_photos_and_retries_failed(straight_run, photos, capsys):
    _, out, rows = straight_run
    stats_file = output_paths(out, "wafer-03")["stats"]
    before = stats_file.stat().st_mtime_ns
    capsys.readouterr()
    code = main(["batch", str(photos), "--out", str(out), "--workers", "2", "--resume", *OPTIONS])
    err = capsys.readouterr().err
    again = _rows(out)
    assert code == 6
    assert sum(r["status"] == "skipped" for r in again.values()) == N_GOOD
    assert {s for s, r in again.items() if r["status"] == "failed"} == set(CORRUPT)
    assert sum(line.startswith("fringemap: failed: ") for line in err.splitlines()) == 3
    assert stats_file.stat().st_mtime_ns == before  # not measured again
    # compared against: the uninterrupted run
    assert _numbers(again) == _numbers(rows)


def test_run_batch_in_this_process(straight_run, photos, tmp_path):
    _, _, rows = straight_run
    recipe = Recipe.from_dict(
        {"stack": {"film": "sio2", "substrate": "si"}, "search": {"range_nm": [0.0, 1000.0]}}
    )
    inputs = collect_inputs([photos / "wafer-04.jpg", photos / "notes.jpg"], recursive=False)
    job = MapJob(recipe=recipe, out_dir=tmp_path / "api")
    summary = run_batch(inputs, job, workers=1, progress=False)
    assert (summary.count("ok"), summary.count("failed")) == (1, 1)
    assert [r["stem"] for r in summary.failures] == ["notes"]
    assert summary.workers == 1 and summary.scheduler is None and summary.seconds > 0
    # compared against: the uninterrupted run with two worker processes
    by_stem = {r["stem"]: r for r in summary.rows}
    assert _numbers(by_stem) == {s: v for s, v in _numbers(rows).items() if s in by_stem}
    assert summary.csv_path.is_file() and summary.json_path.is_file()


def test_resume_needs_the_same_recipe_and_complete_outputs(straight_run, photos):
    _, out, rows = straight_run
    doc = json.loads(output_paths(out, "wafer-05")["stats"].read_text(encoding="utf-8"))
    path = str(photos / "wafer-05.jpg")
    assert recorded_stats(path, "wafer-05", out, doc["recipe_hash"]) is not None
    assert recorded_stats(path, "wafer-05", out, "0123456789abcdef") is None
    assert recorded_stats(str(photos / "wafer-06.jpg"), "wafer-05", out, doc["recipe_hash"]) is None
    missing = (out / "wafer-05.not-there.png",)
    assert recorded_stats(path, "wafer-05", out, doc["recipe_hash"], also=missing) is None


def test_stale_temporary_files_are_removed(tmp_path):
    finished = subprocess.run(
        [sys.executable, "-c", "import os; print(os.getpid())"],
        capture_output=True,
        text=True,
        check=True,
    )
    dead = int(finished.stdout)  # a process that has ended
    stale = tmp_path / f".w.map.png.{dead}-0123abcd.partial"
    live = tmp_path / f".w.stats.json.{os.getpid()}-0123abcd.partial"
    other = tmp_path / "notes.partial"
    for p in (stale, live, other):
        p.write_bytes(b"x")
    # compared against: which writer processes are still running
    assert remove_stale_partials(tmp_path) == 1
    assert not stale.exists() and live.exists() and other.exists()


def test_killed_run_resumes_to_the_same_summary(straight_run, photos, tmp_path):
    psutil = pytest.importorskip("psutil")
    _, _, rows = straight_run
    out = tmp_path / "killed"
    cmd = [
        str(BIN / "fringemap"),
        "batch",
        str(photos),
        "--out",
        str(out),
        "--workers",
        "2",
        *OPTIONS,
    ]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    children = []
    try:
        deadline = time.monotonic() + 90
        while len(list(out.glob("*.stats.json"))) < 6 and time.monotonic() < deadline:
            assert proc.poll() is None, "the batch ended before it could be killed"
            time.sleep(0.05)
        children = psutil.Process(proc.pid).children(recursive=True)
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=10)
        # the orphaned workers notice and stop by themselves
        _, alive = psutil.wait_procs(children, timeout=30)
        assert not alive
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(timeout=10)
        for child in children:
            if child.is_running():
                child.kill()
    done_when_killed = len(list(out.glob("*.stats.json")))
    assert 6 <= done_when_killed < N_GOOD
    code = main(["batch", str(photos), "--out", str(out), "--workers", "2", "--resume", *OPTIONS])
    assert code == 6
    resumed = _rows(out)
    assert sum(r["status"] == "skipped" for r in resumed.values()) >= 6
    # compared against: the uninterrupted run
    assert _numbers(resumed) == _numbers(rows)
    assert not [p.name for p in out.iterdir() if p.name.endswith(".partial")]
    for stem, r in resumed.items():
        complete = all(p.is_file() for p in output_paths(out, stem).values())
        assert complete == (r["status"] != "failed"), stem


# ----------------------------------------------------------------------- Dask


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _stop(procs) -> None:
    for p in procs:
        if p.poll() is None:
            p.terminate()
    for p in procs:
        try:
            p.wait(timeout=20)
        except subprocess.TimeoutExpired:
            p.kill()
            p.wait(timeout=10)


def test_dask_cluster_gives_the_local_numbers(straight_run, photos, tmp_path):
    distributed = pytest.importorskip("distributed")
    _, _, rows = straight_run
    subset = tmp_path / "subset"
    subset.mkdir()
    for name in ("wafer-01.jpg", "wafer-09.jpg", "wafer-16.jpg", "cut.jpg"):
        shutil.copy(photos / name, subset / name)
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    quiet = {"stdout": subprocess.DEVNULL, "stderr": subprocess.DEVNULL}
    env = {**os.environ, "NUMBA_NUM_THREADS": "1"}
    procs = [
        subprocess.Popen(
            [
                str(BIN / "dask"),
                "scheduler",
                "--host",
                "127.0.0.1",
                "--port",
                str(port),
                "--no-dashboard",
            ],
            **quiet,
        )
    ]
    try:
        for i in range(2):
            procs.append(
                subprocess.Popen(
                    [
                        str(BIN / "dask"),
                        "worker",
                        address,
                        "--nworkers",
                        "1",
                        "--nthreads",
                        "1",
                        "--no-dashboard",
                        "--local-directory",
                        str(tmp_path / f"w{i}"),
                    ],
                    env=env,
                    **quiet,
                )
            )
        with distributed.Client(address, timeout=30, set_as_default=False) as client:
            client.wait_for_workers(2, timeout=60)
        out = tmp_path / "cluster"
        code = main(["batch", str(subset), "--out", str(out), "--scheduler", address, *OPTIONS])
    finally:
        _stop(procs[1:])
        _stop(procs[:1])
    assert code == 6
    on_cluster = _rows(out)
    assert on_cluster["cut"]["status"] == "failed"
    doc = json.loads((out / "batch-summary.json").read_text(encoding="utf-8"))
    assert doc["scheduler"] == address and doc["counts"] == {"ok": 3, "failed": 1, "skipped": 0}
    # compared against: the uninterrupted local run, photo by photo
    expected = {stem: v for stem, v in _numbers(rows).items() if stem in on_cluster}
    assert _numbers(on_cluster) == expected


def test_unreachable_scheduler_fails_fast(photos, tmp_path, capsys):
    pytest.importorskip("distributed")
    address = f"tcp://127.0.0.1:{_free_port()}"  # nothing listens there
    start = time.monotonic()
    code = main(
        [
            "batch",
            str(photos / "wafer-00.jpg"),
            "--out",
            str(tmp_path / "o"),
            "--scheduler",
            address,
            *OPTIONS,
        ]
    )
    elapsed = time.monotonic() - start
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2
    assert elapsed < 10.0
    assert len(err) == 1 and err[0].startswith("fringemap: error: --scheduler: ")
    assert address in err[0]


def test_workers_and_scheduler_exclude_each_other(photos, tmp_path, capsys):
    code = main(
        [
            "batch",
            str(photos),
            "--out",
            str(tmp_path),
            "--workers",
            "2",
            "--scheduler",
            "tcp://127.0.0.1:8786",
            *OPTIONS,
        ]
    )
    assert code == 2
    assert "--workers" in capsys.readouterr().err


def test_allocator_setting_applies_on_glibc_linux():
    # the command and the batch workers keep freed memory for the next photo; on Linux
    # with glibc the allocator accepts the settings (glibc's mallopt returns 1 on success,
    # from memory of the GNU C Library manual), elsewhere the call reports False and
    # changes nothing; a second call is a no-op
    import platform

    from fringemap._memory import keep_freed_memory

    first = keep_freed_memory()
    assert keep_freed_memory() is first
    if sys.platform.startswith("linux") and platform.libc_ver()[0] == "glibc":
        assert first is True
