"""Time series: frame times, the rate fit, a thinning film, EXIF order, video frames.

Frames are rendered by :mod:`fringemap.simulate`: a uniform thermal oxide on
silicon (silicon from another published data set than the recipe's) whose
thickness falls linearly with time, so the true rate is known exactly.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import tifffile

from fringemap.cli import main
from fringemap.errors import OptionError
from fringemap.io import read_tiff_description
from fringemap.optics.stack import Stack
from fringemap.recipe import Recipe
from fringemap.series import run_series
from fringemap.simulate import render_photo
from fringemap.timeline import fit_rate, time_from_name

OPTIONS = ["--film", "sio2", "--substrate", "si", "--range", "300:1000", "-q"]
RECIPE = Recipe.from_dict(
    {"stack": {"film": "sio2", "substrate": "si"}, "search": {"range_nm": [300.0, 1000.0]}}
)


@pytest.fixture(scope="module")
def stack():
    return Stack.from_names(film="sio2", substrate="db:main/Si/Aspnes")


def _field(thickness_nm: float, size: int) -> np.ndarray:
    # a gentle ±25 nm tilt around the mean: a perfectly uniform film's fringe order can be
    # undecidable from its single colour, a tilted one shows its colour sequence
    ramp = (np.arange(size) + 0.5) / size - 0.5
    return thickness_nm + 50.0 * np.broadcast_to(ramp, (size, size))


def _frame(stack, thickness_nm: float, size: int, seed: int) -> np.ndarray:
    sim = render_photo(_field(thickness_nm, size), stack=stack, light="D65", seed=seed)
    return sim.image


def _jpeg(stack, thickness_nm: float, size: int, seed: int) -> bytes:
    t = _field(thickness_nm, size)
    return render_photo(t, stack=stack, light="D65", jpeg_quality=92, seed=seed).jpeg_bytes


# ------------------------------------------------------------------------ times and fit


@pytest.mark.parametrize(
    ("name", "expected"),
    [
        ("film_20250301-101500.jpg", ("clock", (2025, 3, 1, 10, 15, 0, 0))),
        ("20250301T101500.250_a.png", ("clock", (2025, 3, 1, 10, 15, 0, 250000))),
        ("cam 2025-03-01_10-15-07.tif", ("clock", (2025, 3, 1, 10, 15, 7, 0))),
        ("film_t12.5s.jpg", ("elapsed", 12.5)),
        ("run-t1500ms.png", ("elapsed", 1.5)),
        ("t2min.tif", ("elapsed", 120.0)),
        ("film_t=3s.jpg", ("elapsed", 3.0)),
        ("frame_0012.jpg", None),
        ("test5s.jpg", None),  # "t" inside a word is not a time
        ("20251399-101500.jpg", None),  # no 99th day
    ],
)
def test_time_from_name(name, expected):
    found = time_from_name(name)
    if expected is None:
        assert found is None
        return
    kind, value = found
    assert kind == expected[0]
    if kind == "clock":  # compared against: the date written in the name
        assert value.timetuple()[:6] + (value.microsecond,) == expected[1]
    else:
        assert value == pytest.approx(expected[1])


def test_fit_rate_matches_numpy_polyfit():
    rng = np.random.default_rng(3)
    t = np.linspace(0.0, 60.0, 13)
    y = 800.0 - 5.0 * t + rng.normal(0.0, 2.0, t.size)
    fit = fit_rate(t, y)
    # compared against: numpy.polyfit's slope and its covariance (scaled by SSR / (n - 2))
    (slope, intercept), cov = np.polyfit(t, y, 1, cov=True)
    assert fit.rate_nm_per_s == pytest.approx(slope, rel=1e-12)
    assert fit.intercept_nm == pytest.approx(intercept, rel=1e-12)
    assert fit.rate_std_error_nm_per_s == pytest.approx(math.sqrt(cov[0, 0]), rel=1e-9)
    assert fit.r_squared == pytest.approx(np.corrcoef(t, y)[0, 1] ** 2, rel=1e-12)
    assert fit.n == 13
    with_nan = fit_rate(np.append(t, 70.0), np.append(y, np.nan))
    assert with_nan.rate_nm_per_s == pytest.approx(slope, rel=1e-12)
    two = fit_rate([0.0, 1.0], [5.0, 3.0])
    assert two.rate_nm_per_s == -2.0 and math.isnan(two.rate_std_error_nm_per_s)
    assert math.isnan(fit_rate([1.0], [2.0]).rate_nm_per_s)


# ------------------------------------------------------------------------ photo series


def test_thinning_film_rate_is_recovered(stack, tmp_path):
    """Uniform film thinning 5 nm/s, 800 -> 525 nm over 55 s, times in the file names."""
    frames = tmp_path / "frames"
    frames.mkdir()
    times = 5.0 * np.arange(12)
    for i, t in enumerate(times[::-1]):  # written in reverse: order comes from the names
        (frames / f"drain_t{t:g}s.jpg").write_bytes(_jpeg(stack, 800.0 - 5.0 * t, 120, i))
    out = tmp_path / "out"
    code = main(["series", str(frames), "--out", str(out), "--profile", "0,60:119,60", *OPTIONS])
    assert code == 0
    doc = json.loads((out / "series.json").read_text(encoding="utf-8"))
    assert doc["time_basis"] == "name"
    # compared against: the simulated rate, -5 nm/s
    assert doc["rate_nm_per_s"] == pytest.approx(-5.0, rel=0.05)
    assert doc["trend"] == "thinning"
    assert 0 < doc["rate_std_error_nm_per_s"] < 0.25 and doc["r_squared"] > 0.99
    lines = (out / "series.csv").read_text(encoding="utf-8").splitlines()
    assert lines[0] == "time_s,frame,source,mean_nm,median_nm,std_nm,min_nm,max_nm,coverage"
    assert [float(line.split(",")[0]) for line in lines[1:]] == list(times)
    kymo = tifffile.imread(out / "kymograph.tif")
    assert kymo.dtype == np.float32 and kymo.shape == (12, 120)
    description = read_tiff_description(out / "kymograph.tif")
    assert description["row_time_s"] == list(times) and description["unit"] == "nm"
    first_row = kymo[0][np.isfinite(kymo[0])]
    assert np.median(first_row) == pytest.approx(800.0, abs=5.0)  # compared against: truth
    for name in ("series.png", "kymograph.png"):
        assert (out / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not list(out.glob(".*"))


def _with_exif(rgb: np.ndarray, path, when: str) -> None:
    from PIL import Image

    exif = Image.Exif()
    exif.get_ifd(0x8769)[0x9003] = when  # DateTimeOriginal
    Image.fromarray(rgb).save(path, exif=exif.tobytes(), quality=95)


def test_exif_times_order_the_frames(stack, tmp_path):
    frames = tmp_path / "frames"
    frames.mkdir()
    # file-name order a, b, c; EXIF order c, a, b
    for name, when, t in (
        ("a", "10:00:10", 560.0),
        ("b", "10:00:20", 540.0),
        ("c", "10:00:00", 580.0),
    ):
        _with_exif(_frame(stack, t, 64, 1), frames / f"{name}.jpg", f"2025:03:01 {when}")
    result = run_series([frames], RECIPE, tmp_path / "out", progress=False)
    assert result.time_basis == "exif"
    assert list(result.time_s) == [0.0, 10.0, 20.0]
    # compared against: the simulated thicknesses in EXIF order, and a -2 nm/s rate
    assert result.mean_nm == pytest.approx([580.0, 560.0, 540.0], abs=3.0)
    assert result.fit.rate_nm_per_s == pytest.approx(-2.0, rel=0.1)


def test_frames_without_times_need_an_interval(stack, tmp_path):
    frames = tmp_path / "frames"
    frames.mkdir()
    for i, t in enumerate((600.0, 590.0, 580.0)):  # natural order: f2 before f10
        name = ("f2", "f10", "f11")[i]
        (frames / f"{name}.jpg").write_bytes(_jpeg(stack, t, 64, i))
    with pytest.raises(OptionError, match="give --interval") as info:
        run_series([frames], RECIPE, tmp_path / "o1", progress=False)
    assert info.value.where == "--interval"
    result = run_series([frames], RECIPE, tmp_path / "o2", interval=2.0, progress=False)
    assert result.time_basis == "interval" and list(result.time_s) == [0.0, 2.0, 4.0]
    assert result.fit.rate_nm_per_s == pytest.approx(-5.0, rel=0.1)  # compared against: truth


def test_failed_frame_is_reported_and_the_series_goes_on(stack, tmp_path, capsys):
    frames = tmp_path / "frames"
    frames.mkdir()
    for t in (0, 10, 20):
        (frames / f"p_t{t}s.jpg").write_bytes(_jpeg(stack, 600.0 - t, 64, t))
    (frames / "p_t30s.jpg").write_bytes(b"")
    capsys.readouterr()
    code = main(["series", str(frames), "--out", str(tmp_path / "out"), *OPTIONS])
    assert code == 6
    err = capsys.readouterr().err.splitlines()
    assert len([line for line in err if line.startswith("fringemap: failed: ")]) == 1
    doc = json.loads((tmp_path / "out" / "series.json").read_text(encoding="utf-8"))
    assert doc["frames"] == 4 and doc["frames_measured"] == 3
    assert "empty" in doc["failed_frames"][0]["reason"]


def test_profile_off_the_frames_is_an_option_error(stack, tmp_path, capsys):
    frames = tmp_path / "frames"
    frames.mkdir()
    for t in (0, 10):
        (frames / f"p_t{t}s.jpg").write_bytes(_jpeg(stack, 600.0 - t, 64, t))
    code = main(
        [
            "series",
            str(frames),
            "--out",
            str(tmp_path / "out"),
            "--profile",
            "0,10:200,10",
            *OPTIONS,
        ]
    )
    assert code == 2
    assert "--profile" in capsys.readouterr().err


# ------------------------------------------------------------------------ video


def test_video_frames_are_timed_by_the_frame_rate(stack, tmp_path):
    import cv2

    path = tmp_path / "film.avi"
    writer = cv2.VideoWriter(str(path), cv2.VideoWriter_fourcc(*"MJPG"), 2.0, (96, 96))
    if not writer.isOpened():
        pytest.skip("this OpenCV build cannot write MJPG AVI video")
    truth = [600.0 - 4.0 * n for n in range(8)]  # 0.5 s per frame: -8 nm/s
    for n, t in enumerate(truth):
        writer.write(cv2.cvtColor(_frame(stack, t, 96, n), cv2.COLOR_RGB2BGR))
    writer.release()
    out = tmp_path / "out"
    code = main(["series", str(path), "--out", str(out), "--video-step", "2", *OPTIONS])
    if code == 3 and not cv2.VideoCapture(str(path)).isOpened():
        pytest.skip("this OpenCV build cannot read MJPG AVI video")
    assert code == 0
    lines = (out / "series.csv").read_text(encoding="utf-8").splitlines()[1:]
    rows = [line.split(",") for line in lines]
    # compared against: frame n of a 2 fps video is at n / 2 s; every 2nd frame is kept
    assert [float(r[0]) for r in rows] == [0.0, 1.0, 2.0, 3.0]
    assert [int(r[1]) for r in rows] == [0, 2, 4, 6]
    assert [float(r[3]) for r in rows] == pytest.approx(truth[::2], abs=4.0)
    doc = json.loads((out / "series.json").read_text(encoding="utf-8"))
    assert doc["time_basis"] == "video-fps" and doc["video_step"] == 2
    assert doc["rate_nm_per_s"] == pytest.approx(-8.0, rel=0.1)


def test_video_that_cannot_be_opened(tmp_path, capsys):
    bad = tmp_path / "clip.avi"
    bad.write_text("not a video\n", encoding="utf-8")
    code = main(["series", str(bad), "--out", str(tmp_path / "out"), *OPTIONS])
    err = [line for line in capsys.readouterr().err.splitlines() if "error" in line]
    assert code == 3
    assert len(err) == 1 and "cannot be opened as a video" in err[0] and str(bad) in err[0]
