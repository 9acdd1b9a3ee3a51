"""Tests of fringemap.stats: uniformity, spec, sites, scale, profiles and plane fits."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from fringemap.errors import OptionError
from fringemap.stats import (
    SITE_LAYOUTS,
    Scale,
    Spec,
    parse_scale,
    parse_spec,
    plane_fit,
    profile,
    scale_from_points,
    site_pattern,
    site_readings,
    thickness_gradient,
    uniformity,
)


def _holey_map() -> np.ndarray:
    rng = np.random.default_rng(7)
    t = 100.0 + 5.0 * rng.standard_normal((40, 50))
    t[3:9, 10:20] = np.nan
    t[30, :] = np.nan
    return t


def _expected(values: np.ndarray) -> dict:
    """Independent numpy computation of every statistic from the measured values."""
    mean = np.mean(values)
    return {
        "mean_nm": mean,
        "median_nm": np.median(values),
        "std_nm": np.std(values, ddof=0),
        "min_nm": np.min(values),
        "max_nm": np.max(values),
        "range_nm": np.ptp(values),
        "p1_nm": np.percentile(values, 1),
        "p5_nm": np.percentile(values, 5),
        "p95_nm": np.percentile(values, 95),
        "p99_nm": np.percentile(values, 99),
        "cv_percent": np.std(values) / mean * 100,
        "nonuniformity_percent": np.ptp(values) / (2 * mean) * 100,
        "robust_nonuniformity_percent": (np.percentile(values, 99) - np.percentile(values, 1))
        / (2 * mean)
        * 100,
    }


# -------------------------------------------------------------------- uniformity


def test_stats_with_nan_holes():
    # independent numpy computation: statistics of the finite pixels
    t = _holey_map()
    result = uniformity(t)
    values = t[np.isfinite(t)]
    for name, value in _expected(values).items():
        assert getattr(result, name) == pytest.approx(value, rel=1e-12), name
    assert result.count_px == values.size
    assert result.region_px == t.size
    assert result.coverage == pytest.approx(values.size / t.size)
    assert result.passed is None and result.in_spec_fraction is None


def test_stats_with_mask():
    # independent numpy computation: the mask limits the region, coverage is within it
    t = _holey_map()
    mask = np.zeros(t.shape, dtype=bool)
    mask[0:12, 5:25] = True
    result = uniformity(t, mask=mask)
    values = t[mask & np.isfinite(t)]
    for name, value in _expected(values).items():
        assert getattr(result, name) == pytest.approx(value, rel=1e-12), name
    assert result.count_px == values.size == 12 * 20 - 6 * 10
    assert result.coverage == pytest.approx(values.size / (12 * 20))


def test_small_known_values():
    # independent numpy computation by hand: values 90, 100, 110
    t = np.array([[90.0, 100.0, 110.0, np.nan]])
    result = uniformity(t)
    assert result.mean_nm == 100.0
    assert result.std_nm == pytest.approx(math.sqrt(200 / 3))
    assert result.nonuniformity_percent == pytest.approx(10.0)
    assert result.coverage == 0.75


@pytest.mark.parametrize("case", ["all_nan", "empty_mask"])
def test_nothing_measured(case):
    # common practice: nothing measured is reported, not raised
    t = np.full((6, 6), np.nan) if case == "all_nan" else np.ones((6, 6))
    mask = None if case == "all_nan" else np.zeros((6, 6), dtype=bool)
    result = uniformity(t, mask=mask, spec=Spec(1.0, 0.1))
    assert result.count_px == 0 and result.coverage == 0.0
    assert math.isnan(result.mean_nm) and math.isnan(result.p99_nm)
    assert math.isnan(result.nonuniformity_percent)
    assert result.passed is False
    d = result.to_dict()
    assert d["mean_nm"] is None and d["in_spec_fraction"] is None
    json.dumps(d, allow_nan=False)


def test_zero_mean_gives_nan_percentages():
    # independent numpy computation: a percentage of a zero mean is undefined
    result = uniformity(np.array([[-1.0, 1.0]]))
    assert result.mean_nm == 0.0 and math.isnan(result.cv_percent)


def test_spec_fraction_and_pass():
    # independent numpy computation: 97 of 100 values in 100 +- 5 (bounds included)
    values = np.full(100, 100.0)
    values[:3] = [94.0, 106.0, 120.0]
    values[3:5] = [95.0, 105.0]
    t = values.reshape(10, 10)
    spec = Spec(100.0, 5.0)
    result = uniformity(t, spec=spec)
    assert result.in_spec_fraction == pytest.approx(0.97)
    assert result.passed is False
    assert uniformity(t, spec=spec, required_fraction=0.95).passed is True
    d = result.to_dict()
    assert d["spec_target_nm"] == 100.0 and d["spec_tol_nm"] == 5.0 and d["passed"] is False
    json.dumps(d, allow_nan=False)


def test_bad_required_fraction_and_mask_shape():
    # common practice: bad settings are option errors
    with pytest.raises(OptionError):
        uniformity(np.ones((2, 2)), required_fraction=1.5)
    with pytest.raises(OptionError) as info:
        uniformity(np.ones((2, 2)), mask=np.ones((3, 2), dtype=bool))
    assert info.value.where == "--roi"


_finite = st.floats(50.0, 500.0, allow_nan=False)


@settings(max_examples=40, deadline=None)
@given(
    hnp.arrays(np.float64, (6, 7), elements=_finite),
    hnp.arrays(np.bool_, (6, 7)),
    st.floats(0.01, 100.0),
)
def test_properties(t, outside_nan, factor):
    # independent numpy computation: NaN outside the mask changes nothing, and
    # non-uniformity and CV are unchanged by scaling all thicknesses
    mask = np.zeros(t.shape, dtype=bool)
    mask[1:5, 2:6] = True
    base = uniformity(t, mask=mask)
    holed = t.copy()
    holed[outside_nan & ~mask] = np.nan
    assert uniformity(holed, mask=mask) == base
    scaled = uniformity(t * factor, mask=mask)
    assert scaled.nonuniformity_percent == pytest.approx(base.nonuniformity_percent, abs=1e-9)
    assert scaled.cv_percent == pytest.approx(base.cv_percent, abs=1e-9)


# -------------------------------------------------------------------------- spec


@pytest.mark.parametrize("text", ["100±5", "100+-5", "100+/-5", " 100 ± 5 ", "100+-5nm", "1e2±5"])
def test_parse_spec(text):
    # common practice: the usual ways of writing target and tolerance
    assert parse_spec(text) == Spec(100.0, 5.0)


@pytest.mark.parametrize(
    "text", ["100", "100±0", "100±-5", "abc±5", "100±x", "±5", "0±5", "nan±5", "100±inf", ""]
)
def test_parse_spec_errors(text):
    # common practice: option error naming --spec, one line
    with pytest.raises(OptionError) as info:
        parse_spec(text)
    assert info.value.where == "--spec" and "\n" not in str(info.value)


# ------------------------------------------------------------------------- sites


@pytest.mark.parametrize("n", sorted(SITE_LAYOUTS))
def test_site_layouts(n):
    # independent numpy computation: count, centre first, inside the usable radius, balanced
    centre = np.array([400.0, 300.0])
    sites = site_pattern(n, center_xy_px=tuple(centre), radius_px=200.0, edge_exclusion_px=20.0)
    assert sites.shape == (n, 2)
    np.testing.assert_allclose(sites[0], centre)
    radii = np.hypot(*(sites - centre).T)
    assert radii.max() <= 180.0 + 1e-9
    np.testing.assert_allclose(sites.mean(axis=0), centre, atol=1e-9)
    assert len({(round(x, 6), round(y, 6)) for x, y in sites}) == n


def test_site_layout_rings_49():
    # independent numpy computation: rings of 8, 16, 24 at 1/3, 2/3, 3/3 of the usable radius
    sites = site_pattern(49, center_xy_px=(0.0, 0.0), radius_px=90.0)
    radii = np.round(np.hypot(sites[:, 0], sites[:, 1]), 6)
    values, counts = np.unique(radii, return_counts=True)
    np.testing.assert_allclose(values, [0, 30, 60, 90])
    np.testing.assert_array_equal(counts, [1, 8, 16, 24])


@pytest.mark.parametrize(
    ("kwargs", "where"),
    [
        (dict(n_sites=7, radius_px=10.0), "--sites"),
        (dict(n_sites=5, radius_px=0.0), "--edge-exclusion"),
        (dict(n_sites=5, radius_px=10.0, edge_exclusion_px=10.0), "--edge-exclusion"),
        (dict(n_sites=5, radius_px=10.0, edge_exclusion_px=-1.0), "--edge-exclusion"),
    ],
)
def test_site_pattern_errors(kwargs, where):
    # common practice: errors name the option
    with pytest.raises(OptionError) as info:
        site_pattern(center_xy_px=(0.0, 0.0), **kwargs)
    assert info.value.where == where


def test_site_readings():
    # independent numpy computation: disc means and population std, NaN-aware
    yy, xx = np.mgrid[0:50, 0:60].astype(float)
    t = 100.0 + xx + 0.5 * yy
    t[20, 30] = np.nan
    sites = np.array([[30.0, 20.0], [5.0, 5.0], [-100.0, 0.0]])
    table = site_readings(t, sites, disc_radius_px=3.0)
    for k, (x, y) in enumerate(sites[:2]):
        disc = (np.hypot(xx - x, yy - y) <= 3.0) & np.isfinite(t)
        assert table.count_px[k] == disc.sum()
        assert table.mean_nm[k] == pytest.approx(t[disc].mean())
        assert table.std_nm[k] == pytest.approx(t[disc].std())
    assert table.count_px[2] == 0 and math.isnan(table.mean_nm[2])
    rows = table.to_rows()
    assert rows[0]["site"] == 1 and rows[2]["mean_nm"] is None
    json.dumps(rows, allow_nan=False)
    lines = table.to_csv_text().splitlines()
    assert lines[0] == "site,x_px,y_px,mean_nm,std_nm,count_px"
    assert len(lines) == 4 and lines[3].endswith(",,,0")


def test_site_readings_mask_and_errors():
    # independent numpy computation: the mask removes pixels from the discs
    t = np.ones((10, 10))
    mask = np.zeros((10, 10), dtype=bool)
    mask[:, :5] = True
    table = site_readings(t, np.array([[5.0, 5.0]]), disc_radius_px=1.0, mask=mask)
    # of the disc's five pixels (5, 5), (4, 5), (6, 5), (5, 4), (5, 6) only (4, 5) has x < 5
    assert table.count_px == (1,)
    with pytest.raises(OptionError):
        site_readings(t, np.array([[5.0, 5.0]]), disc_radius_px=-1.0)


# ------------------------------------------------------------------------- scale


def test_scale():
    # independent numpy computation: 250 px over 20 mm is 12.5 px/mm
    assert parse_scale(" 12.5 ") == Scale(12.5)
    scale = scale_from_points((0.0, 0.0), (150.0, 200.0), 20.0)
    assert scale.px_per_mm == pytest.approx(12.5)
    assert scale.mm_per_px == pytest.approx(0.08)
    assert float(scale.to_mm(25.0)) == pytest.approx(2.0)


@pytest.mark.parametrize(
    "make",
    [
        lambda: parse_scale("0"),
        lambda: parse_scale("-3"),
        lambda: parse_scale("abc"),
        lambda: parse_scale("nan"),
        lambda: Scale(-1.0),
        lambda: scale_from_points((1.0, 1.0), (1.0, 1.0), 5.0),
        lambda: scale_from_points((0.0, 0.0), (1.0, 1.0), 0.0),
    ],
)
def test_scale_errors(make):
    # common practice: a scale must be > 0; errors name --scale
    with pytest.raises(OptionError) as info:
        make()
    assert info.value.where == "--scale"


# ----------------------------------------------------------------------- profile


def _wedge(h=40, w=60, per_px=2.0):
    yy, xx = np.mgrid[0:h, 0:w].astype(float)
    return 100.0 + per_px * xx + 0.5 * yy


def test_profile_along_wedge():
    # independent numpy computation: bilinear sampling of a plane is exact
    t = _wedge()
    conf = np.full(t.shape, 0.8)
    prof = profile(t, conf, (5.0, 10.5), (45.0, 30.5), step_px=1.0)
    length = math.hypot(40.0, 20.0)
    assert prof.distance_px[0] == 0 and prof.distance_px[-1] == pytest.approx(length)
    assert np.diff(prof.distance_px).max() <= 1.0 + 1e-12
    np.testing.assert_allclose(prof.thickness_nm, 100.0 + 2.0 * prof.x_px + 0.5 * prof.y_px)
    np.testing.assert_allclose(prof.confidence, 0.8)
    assert (prof.x_px[-1], prof.y_px[-1]) == pytest.approx((45.0, 30.5))


def test_profile_holes_and_csv():
    # independent numpy computation: a sample deep in a NaN hole is NaN, beside it is measured
    t = _wedge()
    t[:, 20:30] = np.nan
    prof = profile(t, None, (0.0, 5.0), (59.0, 5.0), step_px=0.5)
    inside = (prof.x_px > 20.5) & (prof.x_px < 28.5)
    assert np.isnan(prof.thickness_nm[inside]).all()
    outside = (prof.x_px <= 19) | (prof.x_px >= 30)
    np.testing.assert_allclose(prof.thickness_nm[outside], 102.5 + 2.0 * prof.x_px[outside])
    assert np.isnan(prof.confidence).all()
    text = prof.to_csv_text(scale=Scale(10.0))
    lines = text.splitlines()
    assert lines[0] == "distance_px,distance_mm,x_px,y_px,thickness_nm,confidence"
    assert len(lines) == prof.x_px.size + 1
    last = lines[-1].split(",")
    assert float(last[1]) == pytest.approx(5.9) and last[-1] == ""
    assert profile(t, None, (0, 0), (1, 0)).to_csv_text().startswith("distance_px,x_px,")


@pytest.mark.parametrize(
    ("start", "end"),
    [((-1.0, 0.0), (5.0, 5.0)), ((0.0, 0.0), (60.0, 5.0)), ((3.0, 3.0), (3.0, 3.0))],
)
def test_profile_errors(start, end):
    # common practice: end points must lie on the image; errors name --profile and its size
    with pytest.raises(OptionError) as info:
        profile(_wedge(), None, start, end)
    assert info.value.where == "--profile"


# ------------------------------------------------------------ gradient and wedge


def test_gradient_of_wedge():
    # independent numpy computation: slope per px times px per mm
    t = _wedge()
    t[10, 10] = np.nan
    gx, gy = thickness_gradient(t, scale=Scale(4.0))
    finite = np.isfinite(t)
    np.testing.assert_allclose(gx[finite], 8.0)
    np.testing.assert_allclose(gy[finite], 2.0)
    assert np.isnan(gx[10, 10]) and np.isnan(gy[10, 10])


def test_plane_fit_wedge_angle():
    # independent computation: a 1000 nm rise over 10 mm is atan(1e-4) rad = 100 urad
    scale = Scale(20.0)  # 10 mm = 200 px
    yy, xx = np.mgrid[0:100, 0:201].astype(float)
    t = 50.0 + 1000.0 * (xx / 200.0)
    t[40:60, 50:80] = np.nan
    fit = plane_fit(t, scale=scale)
    assert fit.slope_x_nm_per_mm == pytest.approx(100.0)
    assert fit.slope_y_nm_per_mm == pytest.approx(0.0, abs=1e-9)
    assert fit.wedge_angle_urad == pytest.approx(math.atan(1e-4) * 1e6)
    assert fit.wedge_angle_urad == pytest.approx(100.0, rel=1e-6)
    assert fit.direction_deg == pytest.approx(0.0, abs=1e-6)
    assert fit.intercept_nm == pytest.approx(50.0)
    assert fit.residual_rms_nm == pytest.approx(0.0, abs=1e-9)


def test_plane_fit_recovers_tilt_with_noise_and_mask():
    # independent numpy computation: numpy lstsq on the same pixels
    rng = np.random.default_rng(3)
    yy, xx = np.mgrid[0:60, 0:80].astype(float)
    scale = Scale(5.0)
    t = 200.0 - 3.0 * xx / 5.0 + 4.0 * yy / 5.0 + rng.normal(0.0, 0.5, xx.shape)
    mask = np.hypot(xx - 40, yy - 30) < 25
    fit = plane_fit(t, scale=scale, mask=mask)
    a = np.column_stack([np.ones(mask.sum()), xx[mask] / 5.0, yy[mask] / 5.0])
    coef, *_ = np.linalg.lstsq(a, t[mask], rcond=None)
    assert (fit.intercept_nm, fit.slope_x_nm_per_mm, fit.slope_y_nm_per_mm) == pytest.approx(
        tuple(coef)
    )
    assert fit.magnitude_nm_per_mm == pytest.approx(math.hypot(coef[1], coef[2]))
    assert fit.direction_deg == pytest.approx(math.degrees(math.atan2(coef[2], coef[1])) % 360)
    assert fit.residual_rms_nm == pytest.approx(np.sqrt(np.mean((t[mask] - a @ coef) ** 2)))
    assert fit.count_px == mask.sum()


def test_plane_fit_degenerate():
    # common practice: too few or collinear pixels give NaN, not an exception
    t = np.full((5, 5), np.nan)
    t[2, :] = np.arange(5.0)
    fit = plane_fit(t, scale=Scale(1.0))
    assert fit.count_px == 5 and math.isnan(fit.slope_x_nm_per_mm)
    json.dumps(fit.to_dict(), allow_nan=False)
    assert plane_fit(np.full((3, 3), np.nan), scale=Scale(1.0)).count_px == 0


@settings(max_examples=60, deadline=None)
@given(
    hnp.arrays(
        np.float32,
        st.tuples(st.integers(1, 30), st.integers(1, 30)),
        elements=st.floats(-1e4, 1e4, width=32) | st.just(np.float32(np.nan)),
    ),
    st.integers(0, 2**32 - 1),
)
def test_float32_maps_match_numpy(t, seed):
    # independent computation: numpy's percentile (linear rule), mean, std and extremes on
    # the measured values of a float32 map (the pipeline's maps take a radix-selection path)
    mask = np.random.default_rng(seed).random(t.shape) < 0.8
    result = uniformity(t, mask=mask)
    values = t[mask & np.isfinite(t)].astype(np.float64)
    assert result.count_px == values.size
    if not values.size:
        assert math.isnan(result.median_nm)
        return
    want = np.percentile(values, [1, 5, 50, 95, 99])
    got = [result.p1_nm, result.p5_nm, result.median_nm, result.p95_nm, result.p99_nm]
    np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-9)
    assert result.min_nm == values.min() and result.max_nm == values.max()
    assert result.mean_nm == pytest.approx(values.mean(), rel=1e-9, abs=1e-9)
    assert result.std_nm == pytest.approx(values.std(), rel=1e-6, abs=1e-6)


def test_float32_statistics_do_not_depend_on_the_thread_count():
    # the same map must give bit-identical statistics whether one thread or several
    # share the passes (a batch worker runs with fewer threads than a single map run)
    import numba

    rng = np.random.default_rng(11)
    t = (500 + 20 * rng.standard_normal((700, 900))).astype(np.float32)
    t[rng.random(t.shape) < 0.05] = np.nan
    before = numba.get_num_threads()
    try:
        several = uniformity(t)
        numba.set_num_threads(1)
        one = uniformity(t)
    finally:
        numba.set_num_threads(before)
    assert one == several
    # and against numpy (independent computation), on the measured values
    values = t[np.isfinite(t)].astype(np.float64)
    assert one.mean_nm == pytest.approx(values.mean(), rel=1e-12)
    assert one.std_nm == pytest.approx(values.std(), rel=1e-9)
