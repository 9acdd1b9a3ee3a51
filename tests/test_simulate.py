"""Tests of fringemap.simulate: thickness shapes, photo formation and the files written."""

from __future__ import annotations

import json

import cv2
import numpy as np
import pytest
import tifffile

from fringemap.colour.table import build_colour_table
from fringemap.colour.transfer import srgb_decode
from fringemap.errors import OptionError
from fringemap.optics.stack import Stack
from fringemap.recipe import Recipe
from fringemap.simulate import (
    SCENARIOS,
    bowl,
    bump,
    disc_mask,
    draining_film,
    frame_mask,
    read_thickness,
    render_photo,
    scratch,
    wedge,
    write_simulated,
)

QUIET = {"vignetting": 0.0, "lamp_gradient": 0.0, "blur_px": 0.0}


@pytest.fixture(scope="module")
def oxide():
    return Stack.from_names(film="sio2", substrate="si")


def uniform(value_nm, shape=(48, 64)):
    return np.full(shape, float(value_nm))


# ------------------------------------------------------------------------ shapes


def test_wedge_end_values_and_axis():
    t = wedge((5, 11), t0_nm=100, t1_nm=300, axis="x")
    assert t.shape == (5, 11) and t.dtype == np.float64
    np.testing.assert_allclose(t[:, 0], 100)
    np.testing.assert_allclose(t[:, -1], 300)
    ty = wedge((5, 11), t0_nm=0, t1_nm=40, axis=0)
    np.testing.assert_allclose(ty[:, 3], [0, 10, 20, 30, 40])


def test_bowl_centre_and_edge():
    t = bowl((101, 101), centre_nm=480, edge_nm=540, radius_px=40)
    assert t[50, 50] == pytest.approx(480)
    assert t[50, 90] == pytest.approx(540)
    assert t[10, 50] == pytest.approx(540)


def test_bump_peak_and_base():
    t = bump((81, 121), base_nm=350, height_nm=450, sigma_px=5, centre=(60, 40))
    assert t[40, 60] == pytest.approx(800)
    assert t[0, 0] == pytest.approx(350, abs=1e-6)
    assert t.max() == pytest.approx(800)


def test_scratch_depth_and_width():
    t = scratch(
        uniform(500, (50, 100)), start_xy=(10, 25), end_xy=(90, 25), width_px=4, depth_to_nm=20
    )
    assert t[25, 50] == 20 and t[23, 50] == 20 and t[27, 50] == 20
    assert t[22, 50] == 500 and t[28, 50] == 500
    assert t[25, 5] == 500 and t[25, 95] == 500  # beyond the segment's ends


def test_draining_film_black_band_then_thickening():
    t = draining_film((400, 300), top_nm=90, bottom_nm=1100, black_nm=25, black_fraction=0.15)
    assert np.all(t[:40] == 25)  # the top band is black film
    col = t[:, 150]
    below = col[col > 25]
    assert below[0] == pytest.approx(90, abs=5)  # sharp step from black to the top thickness
    assert np.all(np.diff(below) >= 0)
    assert 1000 < below[-1] < 1200


def test_masks():
    d = disc_mask((11, 11), radius=3)
    assert d[5, 5] and d[5, 8] and not d[5, 9] and not d[0, 0]
    f = frame_mask((10, 12), margin_px=2)
    assert f.sum() == 6 * 8 and not f[1, 5] and f[2, 2]


def test_shape_errors_name_the_argument():
    with pytest.raises(OptionError) as err:
        wedge((5, 5), t0_nm=0, t1_nm=1, axis="z")
    assert err.value.where == "axis"
    with pytest.raises(OptionError) as err:
        bump((5, 5), base_nm=0, height_nm=1, sigma_px=0)
    assert err.value.where == "sigma_px"


# --------------------------------------------------------------------- rendering


@pytest.mark.parametrize("sensor", ["cie1931", "camera-a"])
def test_uniform_colour_matches_colour_table(oxide, sensor):
    t0 = 301.3
    wb = (1.1, 1.0, 0.9)
    sim = render_photo(
        uniform(t0),
        stack=oxide,
        light="D65",
        sensor=sensor,
        noise=0.01,
        white_balance_error=wb,
        **QUIET,
    )
    table = build_colour_table(
        oxide, light="D65", detector=sensor, angle_deg=0, thickness_range_nm=(250, 350), step_nm=0.5
    )
    expected = table.colour_at(t0) * np.array(wb) * sim.exposure
    got = srgb_decode(sim.image.reshape(-1, 3) / 255.0).mean(axis=0)
    np.testing.assert_allclose(got, expected, atol=0.004)
    # auto exposure: the brightest channel sits at 0.85 of full scale
    assert expected.max() == pytest.approx(0.85, rel=1e-3)


def test_fixed_exposure_and_factor_linear(oxide):
    sim = render_photo(
        uniform(120.0),
        stack=oxide,
        light="D50",
        exposure=2.0,
        exposure_factor=0.5,
        noise=0.0,
        output="linear",
        **QUIET,
    )
    table = build_colour_table(
        oxide,
        light="D50",
        detector="cie1931",
        angle_deg=0,
        thickness_range_nm=(100, 140),
        step_nm=0.5,
    )
    assert sim.exposure == 1.0 and sim.image.dtype == np.float32
    np.testing.assert_allclose(
        sim.image[5, 5], np.clip(table.colour_at(120.0), 0, 1), rtol=1e-4, atol=1e-6
    )


def test_vignetting_and_lamp_gradient(oxide):
    t = uniform(300.0, (101, 151))
    sim = render_photo(
        t,
        stack=oxide,
        light="D65",
        vignetting=0.3,
        lamp_gradient=0.0,
        blur_px=0,
        noise=0,
        output="linear",
    )
    img = sim.image.mean(axis=2)
    for corner in (img[0, 0], img[0, -1], img[-1, 0], img[-1, -1]):
        assert corner / img[50, 75] == pytest.approx(0.7, rel=0.02)
    sim = render_photo(
        t,
        stack=oxide,
        light="D65",
        vignetting=0.0,
        lamp_gradient=0.2,
        blur_px=0,
        noise=0,
        output="linear",
    )
    img = sim.image.mean(axis=2)
    assert img[50, 0] / img[50, -1] == pytest.approx(0.9 / 1.1, rel=1e-4)


@pytest.mark.parametrize(("output", "scale"), [("srgb16", 65535.0), ("linear", 1.0)])
def test_noise_std_as_asked(oxide, output, scale):
    sim = render_photo(
        uniform(300.0, (128, 128)), stack=oxide, light="D65", noise=0.02, output=output, **QUIET
    )
    std = (sim.image / scale).std(axis=(0, 1))
    np.testing.assert_allclose(std, 0.02, rtol=0.06)


def test_sixteen_bit_keeps_more_than_eight_bits(oxide):
    t = wedge((16, 1500), t0_nm=0, t1_nm=1200)
    sim = render_photo(t, stack=oxide, light="D65", noise=0, output="srgb16", **QUIET)
    assert sim.image.dtype == np.uint16
    for c in range(3):
        assert np.unique(sim.image[..., c]).size > 256


def test_jpeg_round_trip_keeps_rgb_order(oxide, tmp_path):
    kw = {"stack": oxide, "light": "D65", "white_balance_error": (1.0, 0.3, 0.3), **QUIET}
    plain = render_photo(uniform(240.0), noise=0, **kw)  # a red-dominated field
    jpg = render_photo(uniform(240.0), noise=0, jpeg_quality=90, **kw)
    r, g, b = jpg.image.reshape(-1, 3).mean(axis=0)
    assert r > 2 * g and r > 2 * b
    np.testing.assert_allclose(
        jpg.image.reshape(-1, 3).mean(axis=0), plain.image.reshape(-1, 3).mean(axis=0), atol=3
    )
    paths = write_simulated(jpg, tmp_path, "red", fmt="jpg")
    back = cv2.cvtColor(cv2.imread(str(paths["image"])), cv2.COLOR_BGR2RGB)
    np.testing.assert_array_equal(back, jpg.image)


def test_truth_nan_outside_mask_and_files(oxide, tmp_path):
    shape = (60, 60)
    mask = disc_mask(shape, radius=25)
    sim = render_photo(
        bowl(shape, centre_nm=480, edge_nm=540),
        stack=oxide,
        light="F11",
        film_mask=mask,
        output="srgb16",
        seed=3,
    )
    assert np.all(np.isnan(sim.thickness_nm[~mask])) and np.all(np.isfinite(sim.thickness_nm[mask]))
    assert sim.image.shape == (60, 60, 3)
    assert np.all(sim.image[0, 0] < 0.05 * 65535)  # black background, only noise
    paths = write_simulated(sim, tmp_path, "w", fmt="png")
    back = cv2.cvtColor(cv2.imread(str(paths["image"]), cv2.IMREAD_UNCHANGED), cv2.COLOR_BGR2RGB)
    np.testing.assert_array_equal(back, sim.image)
    truth = read_thickness(paths["truth"])
    np.testing.assert_array_equal(np.isnan(truth), ~mask)
    np.testing.assert_allclose(truth[mask], sim.thickness_nm[mask], rtol=1e-6)
    settings = json.loads(paths["settings"].read_text())
    assert settings["seed"] == 3 and settings["light"]["name"] == "FL11"
    again = render_photo(paths["truth"], stack=oxide, light="F11", output="srgb16", seed=3)
    np.testing.assert_array_equal(again.film_mask, mask)  # NaN in the TIFF = no film
    tif = write_simulated(sim, tmp_path, "w", fmt="tif")["image"]
    np.testing.assert_array_equal(tifffile.imread(tif), sim.image)


def test_seeds_are_reproducible(oxide):
    kw = {"stack": oxide, "light": "D65", "noise": 0.02}
    a = render_photo(uniform(250.0), seed=7, **kw).image
    b = render_photo(uniform(250.0), seed=7, **kw).image
    c = render_photo(uniform(250.0), seed=8, **kw).image
    np.testing.assert_array_equal(a, b)
    assert np.any(a != c)


def test_render_errors_name_the_option(oxide):
    with pytest.raises(OptionError) as err:
        render_photo(uniform(100.0), stack=oxide, light="D65", output="srgb16", jpeg_quality=90)
    assert err.value.where == "jpeg_quality"
    with pytest.raises(OptionError) as err:
        render_photo(uniform(-5.0), stack=oxide, light="D65")
    assert err.value.where == "thickness_nm"
    with pytest.raises(OptionError) as err:
        render_photo(uniform(5.0), stack=oxide, light="D65", film_mask=np.ones((2, 2), bool))
    assert err.value.where == "film_mask"


def test_scenarios_have_valid_recipes():
    for name, make in SCENARIOS.items():
        sim, recipe, note = make()
        Recipe.from_dict(recipe)
        assert "\n" not in note and sim.image.dtype == np.uint8, name
        assert sim.settings["jpeg_quality"] == 90
