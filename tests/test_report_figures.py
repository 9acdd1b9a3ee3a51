"""Tests of fringemap.report: the colour chart (CSV and PNG) and the map, histogram and
profile figures.

The PNGs are read back and their pixels checked against what was drawn: the
chart strip holds the table's colours at the right thicknesses, unmeasured
pixels are neutral grey, a linear ramp runs from the colour map's low end to
its high end, categorical colours appear where their codes are.
"""

from __future__ import annotations

import csv
import io
import time
from types import SimpleNamespace

import cv2
import numpy as np
import pytest

pytest.importorskip("fringemap.io.write")  # the figures are written through atomic_path

import matplotlib  # noqa: E402

from fringemap.errors import OptionError, OutputError  # noqa: E402
from fringemap.recipe import Recipe  # noqa: E402
from fringemap.report.chart import (  # noqa: E402
    CSV_HEADER,
    chart_csv_text,
    draw_chart,
    white_point_xyz,
)
from fringemap.report.figures import (  # noqa: E402
    NAN_GREY,
    block_mean,
    draw_confidence_map,
    draw_histogram,
    draw_profiles,
    draw_reason_map,
    draw_thickness_map,
)
from fringemap.stats import Profile, Scale  # noqa: E402

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


# ----------------------------------------------------------------------- helpers


def _read_png(path) -> np.ndarray:
    """RGB uint8 pixels of a PNG, after checking the signature and a sensible size."""
    with open(path, "rb") as handle:
        assert handle.read(8) == PNG_SIGNATURE
    bgr = cv2.imread(str(path), cv2.IMREAD_COLOR)
    assert bgr is not None, "not a readable PNG"
    h, w = bgr.shape[:2]
    assert 300 <= w <= 4000 and 300 <= h <= 5000, (w, h)
    return cv2.cvtColor(bgr, cv2.COLOR_BGR2RGB)


def _keys(rgb8: np.ndarray) -> np.ndarray:
    rgb8 = np.asarray(rgb8, dtype=np.int64)
    return (rgb8[..., 0] << 16) | (rgb8[..., 1] << 8) | rgb8[..., 2]


def _palette_keys(colours01: np.ndarray, tol: int = 1) -> np.ndarray:
    """Integer keys of 8-bit colours and of every colour within ``tol`` per channel."""
    base = np.round(np.asarray(colours01, dtype=np.float64) * 255).astype(np.int64)
    offsets = np.arange(-tol, tol + 1)
    grid = np.stack(np.meshgrid(offsets, offsets, offsets, indexing="ij"), -1).reshape(-1, 3)
    near = np.clip(base[:, None, :] + grid[None, :, :], 0, 255).reshape(-1, 3)
    return np.unique(_keys(near))


def _matches(img: np.ndarray, colours01: np.ndarray, tol: int = 1) -> np.ndarray:
    """Boolean (H, W): pixel is within ``tol`` (per channel, 8-bit) of one of the colours."""
    return np.isin(_keys(img), _palette_keys(colours01, tol))


def _runs(flags: np.ndarray) -> list[tuple[int, int]]:
    """(start, stop) of the runs of True in a 1-D boolean array."""
    padded = np.concatenate([[False], flags, [False]])
    edges = np.flatnonzero(np.diff(padded.astype(np.int8)))
    return list(zip(edges[::2], edges[1::2], strict=True))


def _map_box(img: np.ndarray, cmap_name: str) -> tuple[int, int, int, int]:
    """Pixel box (x0, x1, y0, y1) of the image panel drawn with a colour map.

    Columns where many pixels are colour-map colours form two runs: the map
    (left, wide) and the colour bar (right, narrow); the map is the widest run.
    """
    lut = matplotlib.colormaps[cmap_name](np.arange(256))[:, :3]
    m = _matches(img, lut, tol=1)
    cols = m.sum(axis=0) > 40
    x0, x1 = max(_runs(cols), key=lambda r: r[1] - r[0])
    rows = m[:, x0:x1].sum(axis=1) > 0.3 * (x1 - x0)
    y0, y1 = max(_runs(rows), key=lambda r: r[1] - r[0])
    return int(x0), int(x1), int(y0), int(y1)


def _no_partials(folder) -> None:
    assert not [p.name for p in folder.iterdir() if p.name.endswith(".partial")]


@pytest.fixture(scope="module")
def oxide():
    """SiO2 on Si under D65, 0-1500 nm in 2 nm steps: (table, stack)."""
    recipe = Recipe.from_dict(
        {
            "stack": {"film": "sio2", "substrate": "si"},
            "light": {"source": "D65"},
            "search": {"range_nm": [0.0, 1500.0], "step_nm": 2.0},
        }
    )
    return recipe.colour_table(), recipe.stack()


# --------------------------------------------------------------------------- CSV


def test_chart_csv_matches_table(oxide):
    table, _ = oxide
    text = chart_csv_text(table)
    assert text.endswith("\n")
    lines = text.splitlines()
    assert lines[0] == "thickness_nm,srgb_r,srgb_g,srgb_b,cie_l,cie_a,cie_b" == CSV_HEADER
    rows = list(csv.reader(io.StringIO(text)))[1:]
    assert len(rows) == table.thickness_nm.size
    values = np.array(rows, dtype=np.float64)
    np.testing.assert_allclose(values[:, 0], table.thickness_nm, atol=5e-5)
    np.testing.assert_allclose(values[:, 1:4], table.srgb, atol=5e-7)
    np.testing.assert_allclose(values[:, 4:7], table.lab, atol=5e-5)
    assert values[:, 1:4].min() >= 0 and values[:, 1:4].max() <= 1
    for cell in rows[10][1:4]:  # sRGB written with 6 decimals, CIELAB with 4
        assert len(cell.split(".")[1]) == 6
    for cell in rows[10][4:]:
        assert len(cell.split(".")[1]) == 4


def test_white_point_is_d65_for_d65(oxide):
    table, _ = oxide
    white = white_point_xyz(table)
    xy = white[:2] / white.sum()
    assert white[1] == pytest.approx(1.0, abs=1e-9)
    np.testing.assert_allclose(xy, [0.3127, 0.3290], atol=2e-3)


# ------------------------------------------------------------------------- chart


def test_chart_strip_holds_table_colours(oxide, tmp_path):
    table, stack = oxide
    out = draw_chart(table, stack, angle_deg=0.0, path=tmp_path / "chart.png")
    assert out == tmp_path / "chart.png"
    _no_partials(tmp_path)
    img = _read_png(out)
    h, w = img.shape[:2]
    assert w >= 1500  # 12 in at 150 dpi

    # image rows where most sampled columns are table colours are strip rows
    columns = np.linspace(0.12 * w, 0.88 * w, 80).astype(int)
    strip_rows = _matches(img[:, columns], table.srgb, tol=1).mean(axis=1) > 0.7
    bands = [b for b in _runs(strip_rows) if b[1] - b[0] >= 20]
    assert len(bands) == 3  # 0-500, 500-1000, 1000-1500 nm

    rgb8 = np.round(table.srgb * 255).astype(int)
    t = table.thickness_nm
    for (y0, y1), (start, end) in zip(bands, [(0, 500), (500, 1000), (1000, 1500)], strict=True):
        row = img[(y0 + y1) // 2].astype(int)
        on = _matches(row[None], table.srgb, tol=1)[0]
        x0, x1 = _runs(on)[0][0], max(_runs(on), key=lambda r: r[1] - r[0])[1]
        if start > 0:  # rows after the first run edge to edge
            x0 = min(r[0] for r in _runs(on) if r[1] - r[0] > 5)
        x1 = max(r[1] for r in _runs(on) if r[1] - r[0] > 5)
        assert x1 - x0 > 0.8 * w
        for frac in (0.1, 0.5, 0.9):
            x = int(round(x0 + frac * (x1 - x0)))
            nm = start + frac * (end - start)
            near = (t >= nm - 4) & (t <= nm + 4)  # the thickness there, +-4 nm
            dist = np.abs(rgb8[near] - row[x]).max(axis=1).min()
            assert dist <= 2, (nm, row[x])
    # the thinnest film's colour at the left end of the first strip
    y0, y1 = bands[0]
    row = img[(y0 + y1) // 2].astype(int)
    x0 = _runs(_matches(row[None], table.srgb, tol=1)[0])[0][0]
    assert np.abs(row[x0 + 3] - rgb8[0]).max() <= 2


def test_chart_rejects_another_angle(oxide, tmp_path):
    table, stack = oxide
    with pytest.raises(OptionError, match="differs"):
        draw_chart(table, stack, angle_deg=30.0, path=tmp_path / "c.png")
    assert not (tmp_path / "c.png").exists()


def test_chart_short_range_one_row(tmp_path):
    recipe = Recipe.from_dict(
        {
            "stack": {"film": "sio2", "substrate": "si"},
            "light": {"source": "A", "angle_deg": 20.0},
            "search": {"range_nm": [30.0, 330.0], "step_nm": 1.0},
        }
    )
    table = recipe.colour_table()
    out = draw_chart(
        table,
        recipe.stack(),
        angle_deg=20.0,
        path=tmp_path / "s.png",
        title="Oxide under tungsten light",
    )
    img = _read_png(out)
    columns = np.linspace(0.12 * img.shape[1], 0.88 * img.shape[1], 80).astype(int)
    strip_rows = _matches(img[:, columns], table.srgb, tol=1).mean(axis=1) > 0.7
    assert len([b for b in _runs(strip_rows) if b[1] - b[0] >= 20]) == 1


# -------------------------------------------------------------------- thickness map


def _ramp_with_hole(h=200, w=300, lo=100.0, hi=200.0):
    t = np.tile(np.linspace(lo, hi, w), (h, 1))
    t[80:120, 120:180] = np.nan
    return t


def test_thickness_map_ramp_and_grey_hole(tmp_path):
    t = _ramp_with_hole()
    out = draw_thickness_map(t, tmp_path / "t.png", title="ramp", vmin_nm=100, vmax_nm=200)
    _no_partials(tmp_path)
    img = _read_png(out).astype(int)
    x0, x1, y0, y1 = _map_box(img, "viridis")
    assert (x1 - x0) / (y1 - y0) == pytest.approx(300 / 200, rel=0.05)  # aspect kept
    lut = np.round(matplotlib.colormaps["viridis"](np.array([0.0, 1.0]))[:, :3] * 255)
    yc = (y0 + y1) // 2 + (y1 - y0) // 3  # a row below the hole
    left, right = img[yc, x0 + 2], img[yc, x1 - 3]
    assert np.abs(left - lut[0]).max() <= 6
    assert np.abs(right - lut[1]).max() <= 6
    hole = img[(y0 + y1) // 2, (x0 + x1) // 2]
    assert np.ptp(hole) <= 2  # neutral: R = G = B
    assert np.abs(hole - np.round(np.array(NAN_GREY) * 255)).max() <= 2


def test_thickness_map_in_mm_and_default_limits(tmp_path):
    t = _ramp_with_hole()
    t[0, 0] = 1e6  # a wild pixel must not wash out the colour scale
    out = draw_thickness_map(t, tmp_path / "mm.png", title="mm", scale_px_per_mm=20.0)
    img = _read_png(out).astype(int)
    x0, x1, y0, y1 = _map_box(img, "viridis")
    lut = np.round(matplotlib.colormaps["viridis"](np.array([0.0, 1.0]))[:, :3] * 255)
    yc = y1 - (y1 - y0) // 4
    # default limits are the 0.5-99.5 percentiles: both ends still reach the map's ends
    assert np.abs(img[yc, x0 + 2] - lut[0]).max() <= 12
    assert np.abs(img[yc, x1 - 40] - lut[1]).max() <= 40  # left of the scale bar


def test_thickness_map_all_nan_and_flat(tmp_path):
    draw_thickness_map(np.full((50, 60), np.nan), tmp_path / "nan.png", title="empty")
    draw_thickness_map(np.full((50, 60), 123.0), tmp_path / "flat.png", title="flat")
    for name in ("nan.png", "flat.png"):
        _read_png(tmp_path / name)


def test_thickness_map_large_is_reduced_and_fast(tmp_path):
    rng = np.random.default_rng(3)
    t = (300 + rng.standard_normal((3000, 4000))).astype(np.float32)
    t[:, :200] = np.nan
    start = time.perf_counter()
    draw_thickness_map(t, tmp_path / "big.png", title="12 MP")
    elapsed = time.perf_counter() - start
    _read_png(tmp_path / "big.png")
    assert elapsed < 4.0  # typically well under a second; generous for slow machines


def test_thickness_map_errors(tmp_path):
    with pytest.raises(OptionError):
        draw_thickness_map(np.ones((5, 5)), tmp_path / "x.png", title="x", scale_px_per_mm=0)
    with pytest.raises(OptionError):
        draw_thickness_map(np.ones((5, 5)), tmp_path / "x.png", title="x", vmin_nm=5, vmax_nm=1)
    with pytest.raises(OutputError):
        draw_thickness_map(np.ones((5, 5)), tmp_path / "missing" / "x.png", title="x")


def test_block_mean_against_loops():
    rng = np.random.default_rng(0)
    a = rng.random((23, 31))
    a[rng.random(a.shape) < 0.4] = np.nan
    k = 4
    got = block_mean(a, k)
    assert got.shape == (6, 8)
    for i in range(got.shape[0]):
        for j in range(got.shape[1]):
            block = a[i * k : (i + 1) * k, j * k : (j + 1) * k]
            ok = np.isfinite(block)
            if ok.sum() and 2 * ok.sum() >= block.size:
                assert got[i, j] == pytest.approx(block[ok].mean(), rel=1e-5)
            else:
                assert np.isnan(got[i, j])


# --------------------------------------------------------------- reason/confidence


def test_reason_map_colours_where_their_codes_are(tmp_path):
    r = np.zeros((120, 240), np.uint8)
    r[:, 80:160] = 1
    r[:, 160:] = 2
    r[:5, :5] = 9  # present but unlabelled
    colours = {0: (0.2, 0.6, 0.3), 1: (230, 159, 0), 2: (0.55, 0.1, 0.6)}
    labels = {0: "measured", 1: "low confidence", 2: "saturated", 3: "never used"}
    out = draw_reason_map(r, tmp_path / "r.png", labels=labels, colours=colours, title="why")
    img = _read_png(out)
    means = []
    for code in (0, 1, 2):
        c = np.array(colours[code], dtype=float)
        c = c / 255 if c.max() > 1 else c
        m = _matches(img, c[None], tol=1)
        assert m.sum() > 10_000, code
        means.append(np.nonzero(m)[1].mean())
    assert means[0] < means[1] < means[2]  # left, middle, right thirds
    with pytest.raises(OptionError):
        draw_reason_map(r, tmp_path / "bad.png", labels=labels, colours={0: "red"}, title="x")


def test_confidence_map_ramp(tmp_path):
    c = np.tile(np.linspace(0, 1, 150)[:, None], (1, 200))  # 0 at the top, 1 at the bottom
    c[60:90, 80:120] = np.nan
    out = draw_confidence_map(c, tmp_path / "c.png", title="confidence")
    img = _read_png(out).astype(int)
    x0, x1, y0, y1 = _map_box(img, "cividis")
    lut = np.round(matplotlib.colormaps["cividis"](np.array([0.0, 1.0]))[:, :3] * 255)
    xc = x0 + (x1 - x0) // 5
    assert np.abs(img[y0 + 2, xc] - lut[0]).max() <= 6
    assert np.abs(img[y1 - 3, xc] - lut[1]).max() <= 6
    hole = img[(y0 + y1) // 2, (x0 + x1) // 2]
    assert np.ptp(hole) <= 2


# ---------------------------------------------------------------------- histogram

SPEC_RED = np.array([0xB2, 0x22, 0x22]) / 255


def _red_columns(img) -> int:
    red = _matches(img, SPEC_RED[None], tol=2)
    return len([r for r in _runs(red.sum(axis=0) > 100) if r[1] - r[0] >= 1])


def test_histogram_with_and_without_spec(tmp_path):
    rng = np.random.default_rng(5)
    t = rng.normal(100, 3, (200, 300))
    t[:20] = np.nan
    out = draw_histogram(t, tmp_path / "h.png", title="distribution", spec=(100.0, 5.0))
    assert _red_columns(_read_png(out)) == 3  # two limits and the dashed target
    out = draw_histogram(t, tmp_path / "h0.png", title="distribution")
    assert _red_columns(_read_png(out)) == 0
    draw_histogram(np.full(10, np.nan), tmp_path / "empty.png", title="none", spec=(1, 1))
    _read_png(tmp_path / "empty.png")
    with pytest.raises(OptionError):
        draw_histogram(t, tmp_path / "bad.png", title="x", spec=(100.0, -1.0))


# ----------------------------------------------------------------------- profiles


def _profile(n, thickness, confidence):
    d = np.arange(n, dtype=float)
    return Profile(d, d, np.zeros(n), np.asarray(thickness, float), np.asarray(confidence, float))


def _band_pixels(img, colour01, alpha=0.28) -> int:
    blended = alpha * np.asarray(colour01) + (1 - alpha)
    return int(_matches(img, blended[None], tol=3).sum())


def test_profiles_colours_and_confidence_band(tmp_path):
    n = 200
    smooth = 100 + 10 * np.sin(np.linspace(0, 3, n))
    blue, orange = matplotlib.colormaps["tab10"].colors[:2]
    sure = _profile(n, smooth, np.ones(n))
    unsure = _profile(n, smooth + 30, np.zeros(n))
    out = draw_profiles([sure, unsure], tmp_path / "p.png", scale=Scale(10.0))
    img = _read_png(out)
    for c in (blue, orange):
        assert _matches(img, np.array(c)[None], tol=2).sum() > 500
    assert _band_pixels(img, orange) > 5000  # confidence 0: a wide band
    assert _band_pixels(img, blue) < 200  # confidence 1: none

    # NaN confidence: no band; NaN thickness: gaps, no error
    t = smooth.copy()
    t[50:60] = np.nan
    draw_profiles([_profile(n, t, np.full(n, np.nan))], tmp_path / "p2.png")
    assert _band_pixels(_read_png(tmp_path / "p2.png"), blue) < 200


def test_profiles_accept_duck_types_and_reject_empty(tmp_path):
    p = SimpleNamespace(
        distance_px=np.arange(5.0), thickness_nm=np.arange(5.0) + 10, confidence=np.full(5, 0.5)
    )
    _read_png(draw_profiles([p], tmp_path / "duck.png"))
    with pytest.raises(OptionError):
        draw_profiles([], tmp_path / "none.png")
