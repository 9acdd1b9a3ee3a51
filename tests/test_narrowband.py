"""Thick films from narrowband fringes (:mod:`fringemap.fringes`), on simulated photos.

The photos are rendered by :func:`fringemap.fringes.render_fringe_photo`: the
stack's reflectance averaged over the light's band (so coherence loss is in
the picture), 30 % vignetting, a 10 % lamp ramp, 2 % Gaussian noise, an
exposure the tool is not told. Renderer and tool share the film index: the
thickness from a fringe count scales as 1/n, so an index error is a scale
error (checked on its own in ``test_index_error_is_a_scale_error``).

Targets (the thick-film issue): median |error| <= λ/(50 n) (8.8 nm for soap at
589 nm) and fewer than 0.1 % of pixels off by more than λ/(4 n) (a fringe-count
error, 110 nm).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import tifffile
from hypothesis import given, settings
from hypothesis import strategies as st

from fringemap import simulate as sim
from fringemap.cli import main
from fringemap.errors import FringemapWarning, MeasurementError, OptionError
from fringemap.fringes import (
    coherence_limit,
    fringe_period_nm,
    measure_fringes,
    narrow_source,
    parse_lines,
    render_fringe_photo,
    unambiguous_range_nm,
)
from fringemap.fringes.phase import fringe_channel
from fringemap.fringes.unwrap import unwrap_coarse_to_fine
from fringemap.optics.stack import Stack
from fringemap.result import REASON_CODES

N = 600
LAMBDA = 589.0


@pytest.fixture(scope="module")
def soap():
    return Stack.from_names(film="soap", substrate="air")


@pytest.fixture(scope="module")
def n589(soap):
    return float(soap.film.index(np.array([LAMBDA]))[0].real)


def _errors(result, truth):
    t = result.map.thickness_nm.astype(np.float64)
    film = np.isfinite(truth)
    ok = film & np.isfinite(t)
    return t[ok] - truth[ok], ok.sum() / film.sum()


def _main_region(result):
    return max(result.regions, key=lambda r: r["pixels"])


def _check_targets(err, coverage, n):
    # acceptance targets of the thick-film issue
    assert np.median(np.abs(err)) <= LAMBDA / (50 * n), np.median(np.abs(err))
    assert np.mean(np.abs(err) > LAMBDA / (4 * n)) < 0.001, np.mean(np.abs(err) > LAMBDA / (4 * n))
    assert coverage >= 0.98, coverage


# ------------------------------------------------------------------ coherence limit


def test_visibility_limit_of_a_10nm_band_is_the_coherence_length(soap, n589):
    # coherence-length argument (common practice): fringes vanish once the extra path
    # 2 n t exceeds λ²/Δλ, i.e. beyond t = λ²/(2 n Δλ)
    lim = coherence_limit(soap, narrow_source("589/10"), angle_deg=0.0)
    rule = LAMBDA**2 / (2 * n589 * 10.0)  # independent computation
    assert lim.thickness_nm == pytest.approx(rule, rel=0.2)
    assert lim.coherence_estimate_nm == pytest.approx(rule, rel=0.01)
    assert lim.thin_film_visibility > 0.99  # a free film: dark fringes are black
    # a 1 nm line reaches ten times further (same argument)
    line = coherence_limit(soap, narrow_source("589"), angle_deg=0.0)
    assert line.thickness_nm == pytest.approx(10 * lim.thickness_nm, rel=0.02)


def test_flat_topped_band_from_csv_fades_at_the_coherence_length(soap, n589, tmp_path):
    # a flat band of full width Δλ: visibility is a sinc whose first zero is at
    # λ²/(2 n Δλ) (Fourier transform of a rectangle; independent computation)
    wl = np.round(np.arange(584.0, 594.001, 0.05), 3)
    rows = ["wavelength_nm,power", "380,0", "583.95,0"]
    rows += [f"{w:.3f},1" for w in wl] + ["594.05,0", "780,0"]
    path = tmp_path / "flat.csv"
    path.write_text("\n".join(rows) + "\n")
    lim = coherence_limit(soap, narrow_source(str(path)), angle_deg=0.0)
    assert lim.thickness_nm == pytest.approx(LAMBDA**2 / (2 * n589 * 10.0), rel=0.2)


def test_white_light_is_refused():
    # documented refusal (docs/fringes.md): a white light has no fringes to count
    with pytest.raises(OptionError, match="not narrow"):
        narrow_source("D65")


def test_fringe_period_follows_snell(soap):
    # λ / (2 n cos θ_film) with sin θ_film = sin θ / n (independent computation)
    src = narrow_source("589")
    n = float(soap.film.index(np.array([LAMBDA]))[0].real)
    cos_f = math.sqrt(1 - (math.sin(math.radians(30)) / n) ** 2)
    assert fringe_period_nm(soap, src, angle_deg=30.0) == pytest.approx(
        LAMBDA / (2 * n * cos_f), rel=1e-3
    )


def test_rendered_fringes_fade_with_the_band(soap):
    # the renderer averages over the band: a 546/10 wedge loses its fringes past the
    # computed limit (about 10 µm) but keeps them at 2 µm (coherence-length argument,
    # common practice)
    t = sim.wedge((40, 1200), t0_nm=0, t1_nm=20000)
    ph = render_fringe_photo(
        t, stack=soap, light="546/10", noise=0.0, vignetting=0.0, lamp_gradient=0.0
    )
    row = ph.linear[20, :, 1].astype(np.float64)
    x2, x15 = int(1200 * 2 / 20), int(1200 * 15 / 20)
    near = np.ptp(row[x2 - 20 : x2 + 20])
    far = np.ptp(row[x15 - 20 : x15 + 20])
    assert far < 0.1 * near


# --------------------------------------------------------------------- accuracy


def test_wedge_0_to_8_um_with_one_anchor(soap, n589):
    t = sim.wedge((N, N), t0_nm=0.0, t1_nm=8000.0)
    ph = render_fringe_photo(t, stack=soap, light="589", noise=0.02, seed=1)
    res = measure_fringes(ph.linear, stack=soap, light="589", anchors=[f"30,300={t[300, 30]:.2f}"])
    assert res.method == "fourier"  # straight fringes: a carrier
    err, coverage = _errors(res, t)
    _check_targets(err, coverage, n589)
    assert _main_region(res)["sign_from"] == "non-negative thickness"


def test_dome_with_one_anchor_on_the_rim(soap, n589):
    t = sim.bowl((N, N), centre_nm=5500.0, edge_nm=500.0, radius_px=430)
    ph = render_fringe_photo(t, stack=soap, light="589", noise=0.02, seed=2)
    res = measure_fringes(ph.linear, stack=soap, light="589", anchors=[f"20,20={t[20, 20]:.2f}"])
    assert res.method == "spiral"  # closed fringes: no carrier
    err, coverage = _errors(res, t)
    _check_targets(err, coverage, n589)


def test_dimple_sign_needs_a_second_reference(soap, n589):
    # a dimple anchored on its rim could as well be a dome: the fringes are the same
    t = sim.bowl((N, N), centre_nm=700.0, edge_nm=5700.0, radius_px=430)
    ph = render_fringe_photo(t, stack=soap, light="589", noise=0.02, seed=3)
    rim = f"20,20={t[20, 20]:.2f}"
    with pytest.raises(MeasurementError, match="thicker-at"):
        measure_fringes(ph.linear, stack=soap, light="589", anchors=[rim])
    by_hint = measure_fringes(
        ph.linear, stack=soap, light="589", anchors=[rim], thicker_at=["40,560"]
    )
    _check_targets(*_errors(by_hint, t), n589)
    assert _main_region(by_hint)["sign_from"] == "thicker-at"
    two = measure_fringes(
        ph.linear, stack=soap, light="589", anchors=[rim, f"300,300={t[300, 300]:.2f}"]
    )
    _check_targets(*_errors(two, t), n589)
    assert _main_region(two)["sign_from"] == "anchors"


def test_index_error_is_a_scale_error(soap):
    # thickness from a fringe count is Δφ λ / (4π n): 1 % too high an index gives
    # thicknesses 1 % too small, measured from the anchor (independent computation)
    t = sim.wedge((300, 300), t0_nm=200.0, t1_nm=4200.0)
    film = Stack.from_names(film=1.34, substrate="air")
    ph = render_fringe_photo(t, stack=film, light="589", noise=0.01, seed=4)
    wrong = Stack.from_names(film=1.34 * 1.01, substrate="air")
    t_a = float(t[150, 10])
    res = measure_fringes(ph.linear, stack=wrong, light="589", anchors=[f"10,150={t_a:.3f}"])
    m = res.map.thickness_nm.astype(np.float64)
    far = float(np.nanmedian(m[:, -20:]) - t_a)
    assert far == pytest.approx((np.mean(t[:, -20:]) - t_a) / 1.01, rel=0.003)


def test_coarse_to_fine_unwrap_matches_full_resolution():
    # a smooth phase of 14 fringes: unwrapped on 3x3 blocks and refined per pixel it
    # equals the truth up to one constant multiple of 2π (independent computation)
    yy, xx = np.mgrid[0:N, 0:N] / N
    truth = 2 * np.pi * (8 * xx**2 + 5 * yy + 2 * np.sin(3 * xx * yy))
    wrapped = np.angle(np.exp(1j * truth))
    un = unwrap_coarse_to_fine(wrapped, mask=np.ones((N, N), bool), max_pixels=40_000)
    assert un.factor >= 3
    diff = un.phase - truth
    assert np.ptp(diff) < 1e-9
    assert abs(diff[0, 0] / (2 * np.pi) - round(diff[0, 0] / (2 * np.pi))) < 1e-9


# ----------------------------------------------------------- colour combination


def test_colour_photo_fixes_sign_and_absolute_thickness(soap, n589):
    from fringemap.measure import measure
    from fringemap.recipe import Recipe

    t = sim.bump((N, N), base_nm=200.0, height_nm=2300.0, sigma_px=110)
    colour = sim.render_photo(t, stack=soap, light="D65", noise=0.01, seed=5)
    recipe = Recipe.from_dict(
        {"stack": {"film": "soap", "substrate": "air"}, "light": {"source": "D65"}}
    )
    cmap = measure(colour.image, recipe)
    ph = render_fringe_photo(t, stack=soap, light="589", noise=0.02, seed=6)
    res = measure_fringes(ph.linear, stack=soap, light="589", colour_map=cmap)
    assert _main_region(res)["sign_from"] == "colour"
    assert _main_region(res)["offset_from"] == "colour"
    _check_targets(*_errors(res, t), n589)


# ---------------------------------------------------------------- several lines


def _islands():
    # two separate round films; A is a low dome, B a tilted film: nothing in the
    # picture links B's fringe order to A's
    h, w = 400, 600
    a = sim.disc_mask((h, w), centre=(150, 200), radius=130)
    b = sim.disc_mask((h, w), centre=(450, 200), radius=130)
    t = np.full((h, w), np.nan)
    t[a] = sim.bowl((h, w), centre_nm=800, edge_nm=200, radius_px=130, centre=(150, 200))[a]
    t[b] = sim.wedge((h, w), t0_nm=-100, t1_nm=1250)[b]
    return t, a, b


def test_two_lines_resolve_what_one_line_cannot(soap):
    lines = parse_lines("450/10,530/10")
    t, a, b = _islands()
    ph = render_fringe_photo(t, stack=soap, light=lines, noise=0.02, seed=7)
    anchor = [f"150,320={t[320, 150]:.2f}"]
    # one line: island B's fringe order is unknown, so it is left unmeasured
    with pytest.warns(FringemapWarning, match="no anchor or other reference"):
        one = measure_fringes(ph.linear, stack=soap, light=lines[1], channel="g", anchors=anchor)
    assert not np.isfinite(one.map.thickness_nm[b]).any()
    assert np.mean(one.map.reasons[b] == REASON_CODES["ambiguous-order"]) > 0.8
    # two lines: the synthetic wavelength fixes B's order (and A's anchor is shared)
    two = measure_fringes(ph.linear, stack=soap, light=lines, anchors=anchor)
    n = float(soap.film.index(np.array([490.0]))[0].real)
    for island in (a, b):
        m = two.map.thickness_nm[island].astype(np.float64)
        ok = np.isfinite(m)
        err = m[ok] - t[island][ok]
        assert ok.mean() > 0.85
        assert np.median(np.abs(err)) <= 450 / (50 * n)
        assert np.mean(np.abs(err) > 450 / (4 * n)) < 0.001
    # without any anchor the lines alone give the absolute thickness of both islands
    free = measure_fringes(ph.linear, stack=soap, light=lines)
    err = free.map.thickness_nm.astype(np.float64) - t
    assert np.nanmedian(np.abs(err)) <= 450 / (50 * n)
    assert {r["offset_from"] for r in free.regions} == {"lines"}


def test_synthetic_wavelength_range(soap):
    # Λ = λ1 λ2 / |λ1 − λ2| (Cheng & Wyant 1984): the pair's thickness range is
    # Λ / (2 n), within the 2 % that dispersion moves it (independent computation)
    lines = parse_lines("450/10,530/10")
    ks = [1 / (2 * fringe_period_nm(soap, s, angle_deg=0.0)) for s in lines]
    n = float(soap.film.index(np.array([490.0]))[0].real)
    lam_s = 450.0 * 530.0 / 80.0
    assert unambiguous_range_nm(ks) == pytest.approx(lam_s / (2 * n), rel=0.03)
    assert unambiguous_range_nm(ks) > 5 * max(
        fringe_period_nm(soap, s, angle_deg=0.0) for s in lines
    )


@settings(max_examples=40, deadline=None)
@given(st.floats(1e-3, 5e-3), st.floats(0.05, 0.9))
def test_two_line_range_is_the_beat_period(k1, ratio):
    # two phases 4π k t drift one fringe apart every 1 / (2 |k1 − k2|) (definition)
    k2 = k1 * ratio
    assert unambiguous_range_nm([k1, k2]) == pytest.approx(1 / (2 * abs(k1 - k2)), rel=1e-9)


def test_lines_parse_channels_and_refuse_clashes():
    # the documented channel rule (docs/fringes.md): blue < 500 nm <= green <= 590 nm < red
    lines = parse_lines("450/20,530/30,630/20")
    assert [s.channel for s in lines] == ["b", "g", "r"]
    assert parse_lines("r=530/10,g=540/10")[0].channel == "r"
    with pytest.raises(OptionError, match="same camera channel"):
        parse_lines("520/10,540/10")


# ------------------------------------------------------------------- bad inputs


def test_colour_photo_in_narrowband_mode_warns_and_uses_luminance(soap):
    # the thick-film issue: a white-light colour photo is read by its luminance, with a
    # warning; under one narrow line the channels are proportional (independent computation)
    t = sim.wedge((200, 200), t0_nm=100, t1_nm=900)
    colour = sim.render_photo(t, stack=soap, light="D65", noise=0.0, output="linear")
    with pytest.warns(FringemapWarning, match="luminance"):
        _, used = fringe_channel(colour.image)
    assert used == "lum"
    grey = render_fringe_photo(
        t, stack=soap, light="589", noise=0.02, channel_response=(1.0, 0.7, 0.05)
    )
    assert fringe_channel(grey.linear)[1] == "r"  # the brightest channel


def test_too_few_fringes(soap):
    # documented errors (docs/fringes.md): no envelope without at least 1.5 fringes
    flat = np.full((200, 200), 3000.0)
    ph = render_fringe_photo(flat, stack=soap, light="589", noise=0.02)
    with pytest.raises(MeasurementError, match="envelope"):
        measure_fringes(ph.linear, stack=soap, light="589", anchors=["100,100=3000"])
    gentle = sim.wedge((200, 200), t0_nm=3000, t1_nm=3150)  # under one fringe
    ph = render_fringe_photo(gentle, stack=soap, light="589", noise=0.02)
    with pytest.raises(MeasurementError, match="too few fringes"):
        measure_fringes(ph.linear, stack=soap, light="589", anchors=["100,100=3075"])


def test_anchor_outside_the_image_or_the_film(soap):
    # documented errors (docs/fringes.md): one line naming the option
    t = sim.bowl((300, 300), centre_nm=3000, edge_nm=500, radius_px=120)
    mask = sim.disc_mask((300, 300), radius=120)
    ph = render_fringe_photo(t, stack=soap, light="589", film_mask=mask)
    with pytest.raises(OptionError, match="outside the 300x300 photo"):
        measure_fringes(ph.linear, stack=soap, light="589", anchors=["400,10=500"])
    with pytest.raises(OptionError, match="not on the film"):
        measure_fringes(ph.linear, stack=soap, light="589", anchors=["5,5=500"])
    with pytest.raises(MeasurementError, match="anchor"):
        measure_fringes(ph.linear, stack=soap, light="589")


# -------------------------------------------------------------------------- CLI


def test_cli_writes_map_outputs_and_prints_the_limit(soap, tmp_path, capsys):
    t = sim.bowl((300, 300), centre_nm=4000, edge_nm=400, radius_px=215)
    ph = render_fringe_photo(t, stack=soap, light="546/10", noise=0.02, seed=8)
    photo = tmp_path / "dome.tif"
    tifffile.imwrite(photo, ph.linear, photometric="rgb")
    out = tmp_path / "out"
    args = [
        "fringes",
        str(photo),
        "--light",
        "546/10",
        "--film",
        "soap",
        "--substrate",
        "air",
        "--anchor",
        f"10,10={t[10, 10]:.2f}",
        "--out",
        str(out),
    ]
    assert main(args) == 0
    printed = capsys.readouterr().out
    assert "visibility falls below 5 %" in printed and "546/10" in printed
    for suffix in (".thickness.tif", ".confidence.tif", ".reasons.tif", ".map.png", ".stats.json"):
        assert (out / f"dome{suffix}").is_file()
    m = tifffile.imread(out / "dome.thickness.tif")
    assert np.nanmedian(np.abs(m - t)) <= 546 / (50 * 1.34)
    # bad anchor: one line on stderr, exit code 2
    assert main(args[:-4] + ["--anchor", "999,5=400", "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--anchor" in err[0]
    # a white light: exit 2
    bad = [a if a != "546/10" else "D65" for a in args]
    assert main(bad) == 2


def test_cli_colour_photo_replaces_the_anchor(soap, tmp_path, capsys):
    import json

    from PIL import Image

    t = sim.bump((300, 300), base_nm=200.0, height_nm=2300.0, sigma_px=55)
    colour = sim.render_photo(t, stack=soap, light="D65", noise=0.01, seed=9)
    Image.fromarray(colour.image).save(tmp_path / "white.png")
    ph = render_fringe_photo(t, stack=soap, light="589", noise=0.02, seed=10)
    tifffile.imwrite(tmp_path / "narrow.tif", ph.linear, photometric="rgb")
    out = tmp_path / "out"
    code = main(["fringes", str(tmp_path / "narrow.tif"), "--light", "589", "--film", "soap",
                 "--substrate", "air", "--colour-photo", str(tmp_path / "white.png"),
                 "--out", str(out)])  # fmt: skip
    capsys.readouterr()
    assert code == 0
    stats = json.loads((out / "narrow.stats.json").read_text())
    main_region = max(stats["fringes"]["regions"], key=lambda r: r["pixels"])
    assert main_region["offset_from"] == "colour"
    m = tifffile.imread(out / "narrow.thickness.tif")
    assert np.nanmedian(np.abs(m - t)) <= LAMBDA / (50 * 1.34)
