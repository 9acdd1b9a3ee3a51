"""Tests of the analysis (regions, verdict, sites, wedge), the report options and the
inspection report (HTML rendered in headless Chromium, PDF rendered with pdftoppm).

System tools: the rendering tests need ``chromium`` and ``pdftoppm`` (Debian packages
``chromium`` and ``poppler-utils``); without them they are skipped with the reason.
"""

from __future__ import annotations

import json
import math
import re
import shutil
import subprocess
from argparse import Namespace
from pathlib import Path

import cv2
import numpy as np
import pytest

from fringemap.cli import main
from fringemap.cli.report_options import report_overrides
from fringemap.errors import OptionError
from fringemap.io import photo_from_array, read_photo
from fringemap.measure import measure
from fringemap.recipe import Recipe, load_recipe
from fringemap.report.analysis import REQUIRED_IN_SPEC, analyse
from fringemap.report.inspection import write_report
from fringemap.report.outputs import write_map_outputs
from fringemap.result import REASON_CODES, ThicknessMap
from fringemap.stats import uniformity

DEMO = Path(__file__).resolve().parent.parent / "demo_images"
CHROMIUM = next(
    (shutil.which(n) for n in ("chromium", "chromium-browser", "google-chrome") if shutil.which(n)),
    None,
)
PDFTOPPM = shutil.which("pdftoppm")
needs_chromium = pytest.mark.skipif(
    CHROMIUM is None, reason="headless Chromium not installed (apt-get install chromium)"
)
needs_pdftoppm = pytest.mark.skipif(
    PDFTOPPM is None, reason="pdftoppm not installed (apt-get install poppler-utils)"
)

# ------------------------------------------------------------------ synthetic map

H, W = 160, 200
CX, CY, R = 100.0, 80.0, 70.0
PX_PER_MM = 5.0


def _synthetic(report: dict, *, roi: str = f"circle:{CX},{CY},{R}", empty: bool = False):
    """A tilted film with NaN holes measured in a circle ROI (reasons outside = outside-roi)."""
    yy, xx = np.mgrid[0:H, 0:W].astype(float)
    rng = np.random.default_rng(11)
    t = 500.0 + 2.0 * (xx / PX_PER_MM) - 1.0 * (yy / PX_PER_MM) + rng.normal(0, 0.4, xx.shape)
    t[30:40, 90:120] = np.nan
    t[100, :] = np.nan
    recipe = Recipe.from_dict(
        {"stack": {"film": "sio2", "substrate": "si"}, "measure": {"roi": roi}, "report": report}
    )
    from fringemap.roi import parse_roi, roi_mask

    inside = roi_mask(parse_roi(roi), (H, W))
    if empty:
        t[:] = np.nan
    t[~inside] = np.nan
    reasons = np.where(inside, 0, REASON_CODES["outside-roi"]).astype(np.uint8)
    reasons[inside & np.isnan(t)] = REASON_CODES["too-dark"]
    result = ThicknessMap(
        thickness_nm=t.astype(np.float32),
        confidence=np.where(np.isfinite(t), 0.9, 0.0).astype(np.float32),
        reasons=reasons,
        stats=uniformity(t, mask=inside),
        recipe=recipe,
        source="synthetic.png",
        provenance={"software": "fringemap test", "colour_table": "none"},
    )
    return result, recipe, xx, yy, inside


def test_region_statistics_and_verdict_against_numpy():
    # independent numpy computation: ROI, evaluation circle R - E and an extra region
    report = {"spec": "502+-12", "scale_px_per_mm": PX_PER_MM, "edge_exclusion_mm": 4.0}
    report["regions"] = ["rect:0,0,100,80", "rect:95,32,100,38"]  # the second lies in a hole
    result, recipe, xx, yy, inside = _synthetic(report)
    a = analyse(result, recipe)
    t = result.thickness_nm.astype(np.float64)
    names = [r.name for r in a.regions]
    assert names == ["roi", "evaluation", "R1", "R2"] and a.evaluation.name == "evaluation"
    ev_mask = inside & (np.hypot(xx - CX, yy - CY) <= R - 4.0 * PX_PER_MM)
    r1_mask = inside & (xx < 100) & (yy < 80)
    for region, mask in zip(a.regions[:3], (inside, ev_mask, r1_mask), strict=True):
        v = t[mask & np.isfinite(t)]
        s = region.stats
        assert s.region_px == mask.sum() and s.count_px == v.size
        assert s.mean_nm == pytest.approx(v.mean(), rel=1e-9)
        assert s.std_nm == pytest.approx(v.std(), rel=1e-6)
        assert s.nonuniformity_percent == pytest.approx(np.ptp(v) / (2 * v.mean()) * 100)
        p1, p99 = np.percentile(v, [1, 99])
        assert s.robust_nonuniformity_percent == pytest.approx((p99 - p1) / (2 * v.mean()) * 100)
        assert s.in_spec_fraction == pytest.approx(np.mean(np.abs(v - 502.0) <= 12.0))
    # an extra region with no measured pixel: empty statistics, JSON nulls
    empty = a.regions[3].stats
    assert empty.count_px == 0 and math.isnan(empty.mean_nm)
    doc = a.to_dict()
    json.dumps(doc, allow_nan=False)
    assert doc["regions"][3]["mean_nm"] is None
    # verdict: common practice pass rule (>= 99 % in spec and >= 90 % measured)
    share = a.evaluation.stats.in_spec_fraction
    assert a.verdict == ("pass" if share >= REQUIRED_IN_SPEC else "fail")
    assert doc["settings"]["edge_exclusion_px"] == pytest.approx(20.0)


@pytest.mark.parametrize(
    ("spec", "expected"), [("520+-60", "pass"), ("520+-3", "fail"), ("", "no spec")]
)
def test_verdicts(spec, expected):
    # common practice: wide tolerance passes, tight fails, none gives no verdict
    result, recipe, *_ = _synthetic({"spec": spec})
    assert analyse(result, recipe).verdict == expected


def test_verdict_not_judged_when_little_is_measured():
    # common practice: a pass needs most of the area measured
    result, recipe, xx, yy, inside = _synthetic({"spec": "520+-60"})
    t = result.thickness_nm.copy()
    t[yy > 60] = np.nan
    holey = ThicknessMap(t, result.confidence, result.reasons, result.stats, recipe)
    a = analyse(holey, recipe)
    assert a.evaluation.stats.coverage < 0.9 and a.verdict == "not judged"
    empty, recipe_e, *_ = _synthetic({"spec": "520+-60"}, empty=True)
    assert analyse(empty, recipe_e).verdict == "not judged"


@pytest.mark.parametrize("n", [1, 5, 9, 49])
def test_sites_against_numpy_discs(n):
    # independent numpy computation: disc means (2 mm radius) inside the evaluation area
    report = {"scale_px_per_mm": PX_PER_MM, "edge_exclusion_mm": 2.0, "sites": n}
    result, recipe, xx, yy, inside = _synthetic(report)
    a = analyse(result, recipe)
    t = result.thickness_nm.astype(np.float64)
    ev = inside & (np.hypot(xx - CX, yy - CY) <= R - 2.0 * PX_PER_MM)
    sites = a.sites
    assert sites.count == n and sites.disc_radius_px == pytest.approx(2.0 * PX_PER_MM)
    assert (sites.table.x_px[0], sites.table.y_px[0]) == (CX, CY)
    for x, y, mean, k in zip(
        sites.table.x_px, sites.table.y_px, sites.table.mean_nm, sites.table.count_px, strict=True
    ):
        disc = ev & np.isfinite(t) & (np.hypot(xx - x, yy - y) <= 2.0 * PX_PER_MM)
        assert k == disc.sum()
        if k:
            assert mean == pytest.approx(t[disc].mean())
    means = np.array([m for m in sites.table.mean_nm if math.isfinite(m)])
    assert sites.nonuniformity_percent == pytest.approx(np.ptp(means) / (2 * means.mean()) * 100)


def test_plane_fit_and_wedge_against_lstsq():
    # independent numpy computation: least squares on the evaluation pixels; 1 nm/mm = 1 µrad
    result, recipe, xx, yy, inside = _synthetic({"scale_px_per_mm": PX_PER_MM})
    a = analyse(result, recipe)
    t = result.thickness_nm.astype(np.float64)
    use = inside & np.isfinite(t)
    m = np.column_stack([np.ones(use.sum()), xx[use] / PX_PER_MM, yy[use] / PX_PER_MM])
    coef, *_ = np.linalg.lstsq(m, t[use], rcond=None)
    assert a.plane.slope_x_nm_per_mm == pytest.approx(coef[1], rel=1e-6)
    assert a.plane.slope_y_nm_per_mm == pytest.approx(coef[2], rel=1e-6)
    magnitude = math.hypot(coef[1], coef[2])
    assert a.plane.wedge_angle_urad == pytest.approx(math.atan(magnitude * 1e-6) * 1e6, rel=1e-6)
    assert a.to_dict()["plane_fit"]["wedge_angle_arcsec"] == pytest.approx(
        math.degrees(math.atan(magnitude * 1e-6)) * 3600, rel=1e-6
    )
    # independent numpy computation: central differences (np.gradient) where both neighbours
    # are measured; the analysis adds one-sided differences at holes, hence the tolerance
    gy, gx = np.gradient(t)
    mag = np.hypot(gx, gy)[inside] * PX_PER_MM
    assert a.gradient.median_nm_per_mm == pytest.approx(np.nanmedian(mag), rel=0.02)


def test_edge_exclusion_of_a_rectangle():
    # independent computation: in an axis-aligned rectangle the distance to the nearest
    # outside pixel centre is the distance to the nearest side plus one pixel
    report = {"scale_px_per_mm": PX_PER_MM, "edge_exclusion_mm": 1.5}
    result, recipe, xx, yy, inside = _synthetic(report, roi="rect:20,10,180,150")
    a = analyse(result, recipe)
    depth = np.minimum.reduce([xx - 19, 180 - xx, yy - 9, 150 - yy])
    expected = inside & (depth > 1.5 * PX_PER_MM)
    np.testing.assert_array_equal(a.evaluation.mask, expected)


def test_optional_files(tmp_path):
    # independent numpy computation: the sites CSV holds the disc means; profiles CSV the samples
    report = {
        "scale_px_per_mm": PX_PER_MM,
        "sites": 5,
        "profiles": ["40,80:160,80", "100,20:100,140"],
    }
    result, *_ = _synthetic(report)
    written = write_map_outputs(result, tmp_path, "syn")
    assert {"sites", "profiles_csv", "profiles_png"} <= set(written)
    doc = json.loads((tmp_path / "syn.stats.json").read_text())
    rows = (tmp_path / "syn.sites.csv").read_text().splitlines()
    assert rows[0] == "site,x_px,y_px,x_mm,y_mm,mean_nm,std_nm,count_px,in_spec"
    first = dict(zip(rows[0].split(","), rows[1].split(","), strict=True))
    assert float(first["mean_nm"]) == pytest.approx(doc["analysis"]["sites"]["sites"][0]["mean_nm"])
    prof = (tmp_path / "syn.profiles.csv").read_text().splitlines()
    assert prof[0] == "profile,distance_px,distance_mm,x_px,y_px,thickness_nm,confidence"
    assert {line.split(",")[0] for line in prof[1:]} == {"P1", "P2"}
    assert len(prof) == 1 + 121 + 121


# ------------------------------------------------------------------- settings


@pytest.mark.parametrize(
    ("report", "roi", "where"),
    [
        ({"edge_exclusion_mm": 2.0}, "all", "--edge-exclusion"),
        ({"sites": 9, "scale_px_per_mm": 5.0}, "rect:0,0,10,10", "--sites"),
        ({"scale_px_per_mm": 5.0, "scale_points": "0,0:100,0=10"}, "all", "--scale-points"),
        (
            {"scale_px_per_mm": 5.0, "edge_exclusion_mm": 20.0},
            "circle:50,50,60",
            "--edge-exclusion",
        ),
    ],
)
def test_settings_cross_checks(report, roi, where):
    # common practice: settings that cannot work together are one-line option errors
    recipe = Recipe.from_dict({"measure": {"roi": roi}, "report": report})
    from fringemap.report.settings import ReportSettings

    with pytest.raises(OptionError) as info:
        ReportSettings.from_recipe(recipe)
    assert info.value.where == where and "\n" not in str(info.value)


@pytest.mark.parametrize(
    ("key", "value"),
    [("spec", "100±0"), ("sites", 7), ("profiles", ["1,2:3"]), ("scale_points", "0,0:0,0=5")],
)
def test_bad_recipe_values_name_the_key(key, value):
    # common practice: recipe errors name the section.key (the report stage parses its
    # own section; the recipe only checks types)
    from fringemap.report.settings import check_report_settings

    with pytest.raises(OptionError) as info:
        check_report_settings(Recipe.from_dict({"report": {key: value}}))
    assert info.value.where.startswith(f"report.{key}")


def test_recipe_round_trip_with_report_keys(tmp_path):
    # common practice: a recipe written as TOML reads back the same
    report = {"spec": "100±5", "scale_points": "0,0:300,400=50", "sites": 9.0, "regions": ["all"]}
    recipe = Recipe.from_dict({"report": {**report, "write_report": True}})
    path = tmp_path / "r.toml"
    path.write_text(recipe.to_toml(), encoding="utf-8")
    again = load_recipe(path)
    assert again.values["report"] == recipe.values["report"]
    assert again.get("report", "sites") == 9


@pytest.mark.parametrize(
    ("text", "target", "tol"),
    [("510+-30", 510, 30), ("510±30", 510, 30), ("5e2 +/- 2.5", 500, 2.5)],
)
def test_spec_option_forms(text, target, tol):
    # common practice: the usual ways of writing a tolerance
    out = report_overrides(Namespace(spec=text))
    recipe = Recipe.from_dict({}).with_overrides(out)
    from fringemap.report.settings import ReportSettings

    spec = ReportSettings.from_recipe(recipe).spec
    assert (spec.target_nm, spec.tol_nm) == (target, tol)


@pytest.mark.parametrize(
    ("args", "where"),
    [
        (["--spec", "510+-0"], "--spec"),
        (["--spec", "510"], "--spec"),
        (["--scale", "0"], "--scale"),
        (["--scale-points", "1,1:1,1=5"], "--scale-points"),
        (["--sites", "7"], "--sites"),
        (["--edge-exclusion", "-1"], "--edge-exclusion"),
        (["--edge-exclusion", "3"], "--edge-exclusion"),  # the soap recipe has no scale
        (["--profile", "1,2,3"], "--profile"),
    ],
)
def test_cli_bad_values_exit_2_with_one_line(args, where, tmp_path, capsys):
    # common practice: exit 2 and one line naming the option, before any measuring
    argv = ["map", str(DEMO / "soap-frame.jpg"), "--recipe", str(DEMO / "soap-frame.recipe.toml")]
    code = main([*argv, "--out", str(tmp_path), *args])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and err[0].startswith(f"fringemap: error: {where}"), err


def test_cli_profile_outside_the_image(tmp_path, capsys):
    # common practice: a profile off the 900x1000 photo is a one-line error, exit 2
    argv = ["map", str(DEMO / "soap-frame.jpg"), "--recipe", str(DEMO / "soap-frame.recipe.toml")]
    code = main([*argv, "--out", str(tmp_path), "--profile", "10,10:1200,10", "-q"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1, err
    assert "--profile" in err[0] and "1200" in err[0]
    assert not list(tmp_path.glob("*.tif"))


# ----------------------------------------------------------------- rendering


def _chromium_screenshot(html: Path, tmp_path: Path) -> np.ndarray:
    shot = tmp_path / f"{html.stem}.png"
    profile = tmp_path / f"chromium-{html.stem}"
    cmd = [
        CHROMIUM,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        f"--user-data-dir={profile}",
        "--enable-logging=stderr",
        "--v=0",
        f"--screenshot={shot}",
        "--window-size=1280,2400",
        html.resolve().as_uri(),
    ]
    run = subprocess.run(cmd, capture_output=True, text=True, timeout=90)
    console = [line for line in run.stderr.splitlines() if ":CONSOLE" in line]
    assert not console, console  # CSP violations, failed loads and script errors land here
    assert shot.is_file(), run.stderr[-2000:]
    return cv2.cvtColor(cv2.imread(str(shot)), cv2.COLOR_BGR2RGB)


def _check_screenshot(rgb: np.ndarray) -> None:
    import matplotlib
    from scipy.spatial import cKDTree

    assert rgb.shape[:2] == (2400, 1280) and rgb.std() > 20, "blank page"
    # viridis pixels (the thickness map and its colour bar): many, across the colour range
    lut = matplotlib.colormaps["viridis"](np.linspace(0, 1, 256))[:, :3] * 255
    sample = rgb[::2, ::2].reshape(-1, 3).astype(float)
    dist, idx = cKDTree(lut).query(sample, distance_upper_bound=8.0)
    hit = np.isfinite(dist)
    assert hit.sum() > 8000, hit.sum()  # of 768 000 samples: at least ~32 000 screen px
    assert np.unique(idx[hit]).size > 150  # dark purple to yellow, not one stray colour
    # text-like bands: light background with some dark strokes and no viridis
    grey = rgb.mean(axis=2)
    bands = 0
    for y0 in range(0, 2400, 40):
        band = grey[y0 : y0 + 40]
        light, dark = (band > 200).mean(), (band < 100).mean()
        if light > 0.7 and 0.003 < dark < 0.25:
            bands += 1
    assert bands >= 8, bands


def _check_pdf(pdf: Path, tmp_path: Path, min_pages: int = 3) -> None:
    prefix = tmp_path / pdf.stem.replace(".", "-")
    subprocess.run([PDFTOPPM, "-png", "-r", "50", str(pdf), str(prefix)], check=True, timeout=90)
    pages = sorted(tmp_path.glob(prefix.name + "-*.png"))
    assert len(pages) >= min_pages
    for page in pages:
        grey = cv2.imread(str(page), cv2.IMREAD_GRAYSCALE)
        assert grey.shape[0] > grey.shape[1]  # portrait A4
        assert (grey < 200).mean() > 0.01 and grey.std() > 5, page.name


def _check_self_contained(html: str) -> None:
    assert "<script" not in html.lower()
    assert "Content-Security-Policy" in html
    for url in re.findall(r'(?:src|href)="([^"]*)"', html):
        assert url.startswith("data:image/png;base64,"), url[:60]
    assert "not a certified measurement" in html and "eye-safety" in html


@pytest.fixture(scope="module")
def oxide_run(tmp_path_factory):
    """The oxide demo through the command line with a spec, a profile, a region and --report."""
    out = tmp_path_factory.mktemp("oxide")
    argv = ["map", str(DEMO / "oxide-wafer.jpg"), "--recipe", str(DEMO / "oxide-wafer.recipe.toml")]
    argv += ["--out", str(out), "--spec", "510+-30", "--profile", "30,500:970,500", "-q"]
    argv += ["--region", "rect:300,300,700,700", "--report"]
    assert main(argv) == 0
    return out


def test_cli_spec_reaches_the_statistics(oxide_run):
    # independent numpy computation: in-spec share of the evaluation circle from the TIFF
    import tifffile

    doc = json.loads((oxide_run / "oxide-wafer.stats.json").read_text())
    a = doc["analysis"]
    assert (a["settings"]["spec_target_nm"], a["settings"]["spec_tol_nm"]) == (510.0, 30.0)
    assert [r["name"] for r in a["regions"]] == ["roi", "evaluation", "R1"]
    t = tifffile.imread(oxide_run / "oxide-wafer.thickness.tif").astype(np.float64)
    yy, xx = np.mgrid[0 : t.shape[0], 0 : t.shape[1]]
    ev = np.hypot(xx - 499.5, yy - 499.5) <= 470 - 3.0 * 9.4
    v = t[ev & np.isfinite(t)]
    evaluation = a["regions"][1]
    assert evaluation["count_px"] == v.size
    assert evaluation["in_spec_fraction"] == pytest.approx(np.mean(np.abs(v - 510) <= 30))
    assert a["verdict"] in ("pass", "fail") and a["verdict_reason"]
    for suffix in ("sites.csv", "profiles.csv", "profiles.png", "report.html", "report.pdf"):
        assert (oxide_run / f"oxide-wafer.{suffix}").is_file(), suffix


@needs_chromium
def test_oxide_report_renders(oxide_run, tmp_path):
    # common practice: a self-contained page that renders offline with no console errors
    html = oxide_run / "oxide-wafer.report.html"
    _check_self_contained(html.read_text(encoding="utf-8"))
    _check_screenshot(_chromium_screenshot(html, tmp_path))


@needs_pdftoppm
def test_oxide_report_pdf(oxide_run, tmp_path):
    # common practice: every page renders and none is blank
    _check_pdf(oxide_run / "oxide-wafer.report.pdf", tmp_path)


@pytest.mark.parametrize(("name", "spec"), [("coated-slide", "400+-60"), ("soap-frame", None)])
def test_demo_reports_render(name, spec, tmp_path):
    # common practice: each demo scenario gives a report that renders in a browser and as PDF
    recipe = load_recipe(DEMO / f"{name}.recipe.toml")
    if spec:
        recipe = recipe.with_overrides({"report.spec": spec})
    photo = read_photo(DEMO / f"{name}.jpg")
    result = measure(photo, recipe)
    paths = write_report(result, photo, tmp_path, name)
    html = paths["report_html"].read_text(encoding="utf-8")
    _check_self_contained(html)
    assert "(max − min) / (2 · mean)" in html  # the formula sits beside the number
    if CHROMIUM is None or PDFTOPPM is None:
        pytest.skip("headless Chromium or pdftoppm not installed (chromium, poppler-utils)")
    _check_screenshot(_chromium_screenshot(paths["report_html"], tmp_path))
    _check_pdf(paths["report_pdf"], tmp_path)


def test_empty_measurement_report_still_renders(tmp_path):
    # common practice: nothing measured is a stated problem, not a crash
    report = {"spec": "100+-5", "scale_px_per_mm": PX_PER_MM, "edge_exclusion_mm": 2.0}
    report |= {"sites": 9, "profiles": ["10,80:190,80"]}
    result, *_ = _synthetic(report, empty=True)
    photo = photo_from_array(np.full((H, W, 3), 0.01, np.float32), encoding="linear")
    paths = write_report(result, photo, tmp_path, "empty")
    html = paths["report_html"].read_text(encoding="utf-8")
    _check_self_contained(html)
    assert "Nothing was measured in the evaluation area" in html and "NOT JUDGED" in html
    if CHROMIUM is None or PDFTOPPM is None:
        pytest.skip("headless Chromium or pdftoppm not installed (chromium, poppler-utils)")
    rgb = _chromium_screenshot(paths["report_html"], tmp_path)
    assert rgb.std() > 20
    problem_red = np.all(np.abs(rgb.astype(int) - (179, 38, 30)) < 12, axis=2)
    assert problem_red.sum() > 100  # the problem box's red edge is on screen
    _check_pdf(paths["report_pdf"], tmp_path)


def test_report_without_photo(tmp_path):
    # common practice: the Python API may have no photo at hand; the map stands alone
    result, *_ = _synthetic({"spec": "520+-60", "scale_px_per_mm": PX_PER_MM})
    paths = write_report(result, None, tmp_path, "nophoto")
    html = paths["report_html"].read_text(encoding="utf-8")
    assert html.count("<img ") == 4 and "PASS" in html  # map, histogram, confidence, reasons
    assert paths["report_pdf"].stat().st_size > 10_000
