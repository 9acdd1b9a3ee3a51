"""Tests of fringemap.colour: lights, detectors, rendering, sRGB transfer and colour tables."""

from __future__ import annotations

import colour
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fringemap.colour.render import Renderer, xyz_to_lab
from fringemap.colour.spectra import (
    GRID_NM,
    detector_names,
    light_names,
    parse_detector,
    parse_light,
)
from fringemap.colour.table import build_colour_table, order_marks_nm
from fringemap.colour.transfer import srgb_decode, srgb_encode
from fringemap.errors import OptionError
from fringemap.optics.stack import Stack, reflectance

WHITE = np.ones(GRID_NM.size)

# Planck's law constants (CODATA 2018 exact SI values)
H, C, KB = 6.62607015e-34, 2.99792458e8, 1.380649e-23


def _planck(wl_nm: np.ndarray, temperature_k: float) -> np.ndarray:
    lam = np.asarray(wl_nm) * 1e-9
    return 1.0 / (lam**5 * np.expm1(H * C / (lam * KB * temperature_k)))


def _hue_deg(lab: np.ndarray) -> float:
    return float(np.degrees(np.arctan2(lab[2], lab[1])) % 360.0)


# ---------------------------------------------------------------------------
# The perfect white reflector
# ---------------------------------------------------------------------------


def _assert_white(renderer: Renderer) -> None:
    # CIE 015:2018: the perfect reflecting diffuser has Y = 1 and L*a*b* = (100, 0, 0);
    # white-balanced linear sRGB (IEC 61966-2-1) of it is (1, 1, 1); tol 1e-9
    np.testing.assert_allclose(renderer.srgb_linear(WHITE), [1.0, 1.0, 1.0], rtol=0, atol=1e-9)
    np.testing.assert_allclose(renderer.rgb(WHITE), [1.0, 1.0, 1.0], rtol=0, atol=1e-9)
    np.testing.assert_allclose(renderer.lab(WHITE), [100.0, 0.0, 0.0], rtol=0, atol=1e-9)
    assert renderer.xyz(WHITE)[1] == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize("name", light_names())
def test_white_reflector_under_every_named_light(name):
    _assert_white(Renderer(parse_light(name), parse_detector("cie1931")))


@settings(max_examples=25, deadline=None)
@given(temperature=st.integers(2000, 10000))
def test_white_reflector_under_blackbodies(temperature):
    _assert_white(Renderer(parse_light(f"blackbody:{temperature}"), parse_detector("cie1931")))


@pytest.mark.parametrize("detector", detector_names())
def test_white_reflector_for_every_detector(detector):
    # each detector's white-balanced RGB of the perfect white is 1 (render module); tol 1e-9
    for light in ("D65", "A", "F11"):
        r = Renderer(parse_light(light), parse_detector(detector))
        np.testing.assert_allclose(r.rgb(WHITE), [1.0, 1.0, 1.0], rtol=0, atol=1e-9)
        np.testing.assert_allclose(r.lab(WHITE), [100.0, 0.0, 0.0], rtol=0, atol=1e-9)


def test_d65_white_point():
    # CIE 015:2018: D65 with the 2° observer has XYZ = (95.047, 100, 108.883)/100;
    # tol 1e-3 (2 nm resampling of 1 nm/5 nm tables)
    white = Renderer(parse_light("D65"), parse_detector("cie1931")).white_xyz
    np.testing.assert_allclose(white, [0.95047, 1.0, 1.08883], atol=1e-3)


@settings(max_examples=30, deadline=None)
@given(
    xyz=st.tuples(st.floats(0.0, 1.2), st.floats(0.0, 1.2), st.floats(0.0, 1.2)),
    light=st.sampled_from(["D65", "A", "F1", "D50"]),
)
def test_xyz_to_lab_matches_colour_science(xyz, light):
    # colour-science 0.4.7 colour.XYZ_to_Lab (CIE 015:2018 §8.2.1); tol 1e-9
    white = Renderer(parse_light(light), parse_detector("cie1931")).white_xyz
    xy = white[:2] / white.sum()
    want = colour.XYZ_to_Lab(np.array(xyz), illuminant=xy)
    # colour-science assumes the white has Y = 1, as ours does
    np.testing.assert_allclose(xyz_to_lab(np.array(xyz), white), want, rtol=0, atol=1e-9)


def test_renderer_space_names():
    # API contract (render module docstring)
    assert Renderer(parse_light("D65"), parse_detector("cie1931")).space == "srgb-linear"
    r = Renderer(parse_light("D65"), parse_detector("camera-a"))
    assert r.space == "camera:camera-a"


# ---------------------------------------------------------------------------
# Thin-film colours
# ---------------------------------------------------------------------------


@pytest.fixture(scope="module")
def oxide_table():
    stack = Stack.from_names(film="sio2", substrate="si")
    return build_colour_table(
        stack,
        light="F1",  # CIE F1, daylight fluorescent
        detector="cie1931",
        angle_deg=0.0,
        thickness_range_nm=(0.0, 600.0),
        step_nm=2.0,
    )


# Pliskin & Conrad, IBM J. Res. Dev. 8, 43 (1964): thermal-oxide colour chart, seen at
# normal incidence under daylight fluorescent light. The hue-angle ranges below are our
# judgement of the chart's colour names, set wide on purpose: CIELAB hue of a saturated
# sRGB blue is near 300°, magenta near 330°, red near 40°, yellow near 100°, green near
# 140° and cyan near 200° (from memory). Chroma floors make sure the hue is meaningful.
OXIDE_CHART = [
    # (thickness nm, chart name, hue ranges in degrees, minimum C*ab, minimum L*)
    (120.0, "royal blue", [(240.0, 300.0)], 15.0, 0.0),
    (210.0, "light gold", [(70.0, 120.0)], 10.0, 50.0),
    (270.0, "red-violet", [(290.0, 350.0)], 15.0, 0.0),
    (310.0, "blue", [(240.0, 300.0)], 15.0, 0.0),
    (390.0, "yellow", [(70.0, 120.0)], 10.0, 50.0),
    (420.0, "carnation pink", [(330.0, 360.0), (0.0, 30.0)], 10.0, 50.0),
    (520.0, "green", [(120.0, 200.0)], 15.0, 0.0),
]


@pytest.mark.parametrize(("thickness", "name", "hues", "min_chroma", "min_l"), OXIDE_CHART)
def test_oxide_colour_chart(oxide_table, thickness, name, hues, min_chroma, min_l):
    i = int(np.argmin(np.abs(oxide_table.thickness_nm - thickness)))
    lab = oxide_table.lab[i]
    hue = _hue_deg(lab)
    assert any(lo <= hue <= hi for lo, hi in hues), f"{name} at {thickness} nm: hue {hue:.1f}°"
    assert oxide_table.chroma[i] >= min_chroma, f"{name} at {thickness} nm"
    assert lab[0] >= min_l, f"{name} at {thickness} nm"


def test_oxide_colours_repeat_in_orders(oxide_table):
    # the second-order blue (~310 nm) is more saturated than the first (~120 nm), as the
    # chart's bluer second order suggests (Pliskin & Conrad 1964) — judgement, loose check
    c = oxide_table.chroma
    t = oxide_table.thickness_nm
    assert c[t == 310.0][0] > c[t == 120.0][0]


@pytest.fixture(scope="module")
def soap_renderer():
    return Renderer(parse_light("D65"), parse_detector("cie1931"))


def _soap_y(renderer: Renderer, thicknesses) -> np.ndarray:
    stack = Stack.from_names(film="soap", substrate="air")
    r = reflectance(stack, thickness_nm=thicknesses, wavelength_nm=GRID_NM, angle_deg=0.0)
    return renderer.xyz(r)[:, 1], renderer.lab(r)


def test_soap_film_black_and_first_order_white(soap_renderer):
    # IUPAC Gold Book "black film": a film much thinner than λ/(4n) reflects almost
    # nothing; the first-order white/silver maximum sits near λ/(4n) ≈ 555/(4·1.338) ≈ 104 nm
    y, lab = _soap_y(soap_renderer, [5.0, 10.0, 15.0, 20.0, 100.0])
    assert y[1] < 0.15 * y[4]  # brief's ratio (10 nm vs 100 nm)
    assert np.all(lab[:4, 0] < 10.0)  # judgement after inspection: L* ≈ 0.5-7 there
    # a few per cent only: single-face R of n ≈ 1.34 is ≈ 2 %, quarter-wave film ≈ 8 %
    assert 0.05 < y[4] < 0.09
    # white/silver: low chroma at 100 nm (judgement: C*ab ≈ 2.4 there)
    assert np.hypot(lab[4, 1], lab[4, 2]) < 6.0
    # zero thickness reflects nothing at all (r01 + r10 = 0, Stokes relations); tol 1e-15
    y0, _ = _soap_y(soap_renderer, [0.0])
    assert y0[0] == pytest.approx(0.0, abs=1e-15)


def test_soap_film_first_maximum_near_quarter_wave(soap_renderer):
    # first maximum of luminous reflectance near λ/(4n) with λ ≈ 555 nm (peak of ȳ, CIE 1931);
    # tol ±15 nm (the ȳ-weighted spectrum is broad)
    t = np.arange(0.0, 200.0, 1.0)
    y, _ = _soap_y(soap_renderer, t)
    assert t[np.argmax(y)] == pytest.approx(555.0 / (4 * 1.338), abs=15.0)


# ---------------------------------------------------------------------------
# Lights
# ---------------------------------------------------------------------------


def test_f_and_fl_spellings_are_the_same_light():
    # CIE 015:2018 names the fluorescent series FL1-FL12; "F11" is the common older spelling
    a, b, c = parse_light("F11"), parse_light("FL11"), parse_light("fl11")
    np.testing.assert_array_equal(a.power, b.power)
    np.testing.assert_array_equal(a.power, c.power)
    assert a.name == b.name == "FL11"


def test_named_lights_are_normalised_on_the_grid():
    # API contract (spectra module docstring): relative power on GRID_NM, max = 1; exact
    for name in ("D65", "A", "LED-B1", "F1", "D50"):
        light = parse_light(name)
        assert light.power.shape == GRID_NM.shape
        assert light.power.max() == pytest.approx(1.0, abs=0.0)
        assert np.all(light.power >= 0)
        assert not light.narrowband


def test_d65_shape():
    # CIE 015:2018 D65 table: S(560) = 100.000, S(460) = 117.812 (from memory); tol 1e-4
    p = parse_light("D65").power
    ratio = p[GRID_NM == 560.0][0] / p[GRID_NM == 460.0][0]
    assert ratio == pytest.approx(100.0 / 117.812, abs=1e-4)


def test_illuminant_a_is_a_2856k_planckian():
    # CIE 015:2018: illuminant A is Planckian at 2856 K (with c₂ = 1.435e-2 m·K, hence the
    # tolerance 1e-3 against a CODATA-constant blackbody)
    a = parse_light("A").power
    bb = _planck(GRID_NM, 2856.0)
    np.testing.assert_allclose(a, bb / bb.max(), atol=1e-3)


@pytest.mark.parametrize(
    "spec", ["blackbody:3200", "3200K", "3200k", "BLACKBODY:3200", "blackbody:3200K"]
)
def test_blackbody_spellings(spec):
    # Planck's law with CODATA 2018 constants; tol 1e-12 (relative spectrum, max = 1)
    light = parse_light(spec)
    bb = _planck(GRID_NM, 3200.0)
    np.testing.assert_allclose(light.power, bb / bb.max(), rtol=0, atol=1e-12)
    assert light.name == "blackbody:3200K"


def test_narrow_line_and_band():
    line = parse_light("589")
    assert line.narrowband and line.centre_nm == 589.0 and line.fwhm_nm == 1.0
    # all the power within ±3 nm of the line (2 nm grid, shared linearly between neighbours)
    assert line.power[np.abs(GRID_NM - 589.0) > 3.0].max() < 1e-3
    # the power's centre of mass stays on the line (independent computation)
    assert abs(np.sum(GRID_NM * line.power) / np.sum(line.power) - 589.0) < 0.01
    band = parse_light("546/10")
    assert band.narrowband and band.centre_nm == 546.0 and band.fwhm_nm == 10.0
    assert GRID_NM[np.argmax(band.power)] == 546.0
    # Gaussian area = peak · FWHM · 1.0645 (common practice); tol 0.5 nm on the FWHM
    assert 2.0 * band.power.sum() / 1.0645 == pytest.approx(10.0, abs=0.5)
    assert parse_light("546 / 10 nm").fwhm_nm == 10.0


def test_light_from_csv(tmp_path):
    path = tmp_path / "lamp.csv"
    rows = "\n".join(f"{w:g},{0.5 + w / 1000:g}" for w in range(370, 800, 10))
    path.write_text("wavelength_nm,power\n" + rows + "\n", encoding="utf-8")
    light = parse_light(str(path))
    # linear interpolation of a linear ramp is exact; normalised to max = 1; tol 1e-12
    want = (0.5 + GRID_NM / 1000) / (0.5 + 0.78)
    np.testing.assert_allclose(light.power, want, rtol=0, atol=1e-12)
    _assert_white(Renderer(light, parse_detector("cie1931")))


@pytest.mark.parametrize(
    ("spec", "hint"),
    [("D66", "D65"), ("F13", None), ("LED-B9", None), ("sunlight", None), ("", None)],
)
def test_unknown_light(spec, hint):
    with pytest.raises(OptionError) as info:
        parse_light(spec)
    assert "\n" not in str(info.value)
    if hint:
        assert hint in str(info.value)


@pytest.mark.parametrize(
    "spec", ["blackbody:100", "blackbody:90000", "900", "300", "546/0", "546/200"]
)
def test_out_of_range_light_parameters(spec):
    with pytest.raises(OptionError):
        parse_light(spec)


@pytest.mark.parametrize(
    "body",
    [
        "380,1\n580,1\n",  # too few rows
        "380,1\n580,1\n480,1\n780,1\n",  # wavelengths not increasing
        "450,1\n500,1\n550,1\n600,1\n",  # does not cover the visible
        "380,1\n500,-1\n650,1\n780,1\n",  # negative power
        "380,0\n500,0\n650,0\n780,0\n",  # all zero
        "380,1\n500,nan\n650,1\n780,1\n",  # NaN
        "380,1,2\n500,1,2\n650,1,2\n780,1,2\n",  # three columns
        "380,1\n500,x\n650,1\n780,1\n",  # not a number
    ],
)
def test_bad_light_csv(tmp_path, body):
    path = tmp_path / "bad.csv"
    path.write_text("wl,power\n" + body, encoding="utf-8")
    with pytest.raises(OptionError) as info:
        parse_light(str(path))
    assert "\n" not in str(info.value)


def test_missing_light_csv(tmp_path):
    with pytest.raises(OptionError, match="not found"):
        parse_light(str(tmp_path / "none.csv"))


# ---------------------------------------------------------------------------
# Detectors
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("name", ["cie1931", "cie1964"])
def test_cie_observers(name):
    det = parse_detector(name)
    assert det.kind == "observer" and det.curves.shape == (GRID_NM.size, 3)
    # CIE 015:2018: ȳ peaks at 555 nm with value 1 (both observers, within the 2 nm grid)
    y = det.curves[:, 1]
    assert y.max() == pytest.approx(1.0, abs=1e-3)
    assert abs(GRID_NM[np.argmax(y)] - 555.0) <= 2.0
    assert np.all(det.curves >= 0)


def test_observer_aliases():
    # API contract: aliases listed in the spectra module
    for alias, name in [("CIE2", "cie1931"), ("human", "cie1931"), ("cie10", "cie1964")]:
        assert parse_detector(alias).name == name


@pytest.mark.parametrize("name", ["camera-a", "camera-b"])
def test_cameras(name):
    det = parse_detector(name)
    assert det.kind == "camera" and det.curves.shape == (GRID_NM.size, 3)
    assert det.curves.max() == pytest.approx(1.0, abs=1e-12)
    assert np.all(det.curves >= 0) and np.all(det.curves.sum(axis=0) > 0)
    # peaks in blue < green < red order (common practice for Bayer sensors)
    peaks = GRID_NM[np.argmax(det.curves, axis=0)]
    assert peaks[2] < peaks[1] < peaks[0]


def test_detector_from_csv(tmp_path):
    path = tmp_path / "cam.csv"
    lines = ["wavelength_nm,r,g,b"]
    for w in range(380, 781, 5):
        r = np.exp(-0.5 * ((w - 600) / 30) ** 2)
        g = np.exp(-0.5 * ((w - 540) / 30) ** 2)
        b = np.exp(-0.5 * ((w - 460) / 30) ** 2)
        lines.append(f"{w},{r:.6f},{g:.6f},{b:.6f}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    det = parse_detector(str(path))
    assert det.kind == "camera" and det.curves.shape == (GRID_NM.size, 3)
    # linear interpolation keeps the tabulated points (2 nm grid hits 5 nm points at 10 nm)
    assert det.curves[GRID_NM == 600.0, 0][0] == pytest.approx(1.0, abs=1e-6)
    r = Renderer(parse_light("D65"), det)
    np.testing.assert_allclose(r.rgb(WHITE), 1.0, atol=1e-12)


@pytest.mark.parametrize(
    "body",
    [
        "380,1,1\n580,1,1\n780,1,1\n",  # three columns only
        "380,1,1,1\n580,-1,1,1\n780,1,1,1\n",  # negative sensitivity
        "380,0,1,1\n580,0,1,1\n780,0,1,1\n",  # a channel all zero
        "380,1,1,1\n780,1,1,1\n",  # too few rows
    ],
)
def test_bad_detector_csv(tmp_path, body):
    path = tmp_path / "bad.csv"
    path.write_text(body, encoding="utf-8")
    with pytest.raises(OptionError):
        parse_detector(str(path))


def test_unknown_detector():
    with pytest.raises(OptionError) as info:
        parse_detector("cie1932")
    assert "cie1931" in str(info.value) and "\n" not in str(info.value)
    with pytest.raises(OptionError):
        parse_detector("")


# ---------------------------------------------------------------------------
# sRGB transfer function
# ---------------------------------------------------------------------------


def test_srgb_reference_values():
    # IEC 61966-2-1:1999: decode(0.5) = ((0.5 + 0.055)/1.055)^2.4 = 0.214041; tol 1e-6
    assert float(srgb_decode(0.5)) == pytest.approx(0.214041, abs=1e-6)
    assert float(srgb_encode(0.214041)) == pytest.approx(0.5, abs=1e-6)
    # IEC 61966-2-1 breakpoints: 0.04045 encoded <-> 0.0031308 linear; tol 1e-7
    assert float(srgb_decode(0.04045)) == pytest.approx(0.0031308, abs=1e-7)
    np.testing.assert_array_equal(srgb_decode(np.array([0, 1])), [0.0, 1.0])
    np.testing.assert_allclose(srgb_encode(np.array([0.0, 1.0])), [0.0, 1.0], atol=1e-15)


def test_srgb_keeps_float32():
    x = np.linspace(0, 1, 11, dtype=np.float32)
    assert srgb_decode(x).dtype == np.float32 and srgb_encode(x).dtype == np.float32


@settings(max_examples=200, deadline=None)
@given(x=st.floats(-1.0, 1.0))
def test_srgb_round_trip(x):
    # encode(decode(x)) = x (IEC 61966-2-1 curves are inverses); tol 1e-12, except within
    # 1e-4 of the breakpoints, where the standard's rounded constants (0.04045, 0.0031308,
    # 12.92) make the two segments meet only to ~3e-8 (from memory; checked here): tol 5e-8
    near = min(abs(abs(x) - 0.04045), abs(abs(x) - 0.0031308)) < 1e-4
    tol = 5e-8 if near else 1e-12
    assert float(srgb_encode(srgb_decode(np.float64(x)))) == pytest.approx(x, abs=tol)
    assert float(srgb_decode(srgb_encode(np.float64(x)))) == pytest.approx(x, abs=tol)


@pytest.mark.parametrize("x", [0.04045, -0.04045, 0.0031308, 0.04045 + 1e-9, 0.04045 - 1e-9])
def test_srgb_round_trip_at_breakpoints(x):
    # explicit examples for the tolerance above (IEC 61966-2-1 constants); tol 5e-8
    assert float(srgb_encode(srgb_decode(x))) == pytest.approx(x, abs=5e-8)


def test_srgb_matches_colour_science():
    # colour-science 0.4.7 cctf_encoding/decoding for sRGB; tol 1e-12
    x = np.linspace(0.0, 1.0, 101)
    np.testing.assert_allclose(srgb_decode(x), colour.cctf_decoding(x, function="sRGB"), atol=1e-12)
    np.testing.assert_allclose(srgb_encode(x), colour.cctf_encoding(x, function="sRGB"), atol=1e-12)


# ---------------------------------------------------------------------------
# Colour table
# ---------------------------------------------------------------------------


def _table(film="sio2", light="D65", detector="cie1931", angle=0.0, rng=(0.0, 300.0), step=2.5):
    stack = Stack.from_names(film=film, substrate="si")
    return build_colour_table(
        stack,
        light=light,
        detector=detector,
        angle_deg=angle,
        thickness_range_nm=rng,
        step_nm=step,
    )


def test_table_shape_and_step():
    # API contract (table module docstring): regular grid lo + k·step, arrays (N, 3)
    tab = _table()
    n = 121  # 0..300 in steps of 2.5
    assert tab.thickness_nm.shape == (n,)
    assert tab.thickness_nm[0] == 0.0 and tab.thickness_nm[-1] == pytest.approx(300.0)
    assert tab.step_nm == pytest.approx(2.5)
    for arr in (tab.rgb, tab.xyz, tab.lab, tab.srgb):
        assert arr.shape == (n, 3) and np.all(np.isfinite(arr))
    assert tab.chroma.shape == (n,)
    assert np.all((tab.srgb >= 0) & (tab.srgb <= 1))
    assert tab.space == "srgb-linear"
    assert tab.description["light"] == "D65" and tab.description["step_nm"] == 2.5
    # a range that is not a whole number of steps stops at the last full step
    tab = _table(rng=(10.0, 100.0), step=4.0)
    assert tab.thickness_nm[-1] == 98.0 and tab.description["range_nm"] == [10.0, 98.0]


def test_table_agrees_with_renderer():
    # the table is the renderer applied to the stack's reflectance (table module); tol 1e-12
    tab = _table(rng=(0.0, 100.0), step=10.0)
    stack = Stack.from_names(film="sio2", substrate="si")
    r = reflectance(stack, thickness_nm=tab.thickness_nm, wavelength_nm=GRID_NM, angle_deg=0.0)
    ren = Renderer(parse_light("D65"), parse_detector("cie1931"))
    np.testing.assert_allclose(tab.rgb, ren.rgb(r), atol=1e-12)
    np.testing.assert_allclose(tab.lab, ren.lab(r), atol=1e-12)
    np.testing.assert_allclose(
        tab.srgb, np.clip(srgb_encode(np.clip(ren.srgb_linear(r), 0, None)), 0, 1), atol=1e-12
    )
    np.testing.assert_allclose(tab.colour_at(tab.thickness_nm), tab.rgb, atol=1e-15)
    mid = tab.colour_at(np.array([[5.0]]))
    assert mid.shape == (1, 1, 3)
    np.testing.assert_allclose(mid[0, 0], 0.5 * (tab.rgb[0] + tab.rgb[1]), atol=1e-12)


def test_table_key_stable_and_distinct():
    # API contract: the key hashes every input (common practice for cache keys)
    base = _table().key
    assert _table().key == base  # same inputs, separately built
    assert isinstance(base, str) and len(base) == 20
    others = [
        _table(film="si3n4").key,
        _table(light="A").key,
        _table(detector="camera-a").key,
        _table(angle=20.0).key,
        _table(step=5.0).key,
        _table(rng=(0.0, 400.0)).key,
    ]
    assert base not in others and len(set(others)) == len(others)


def test_camera_table_space():
    tab = _table(detector="camera-b", rng=(0.0, 100.0), step=5.0)
    assert tab.space == "camera:camera-b"


@pytest.mark.parametrize(
    ("rng", "step"),
    [
        ((10.0, 5.0), 1.0),
        ((-1.0, 5.0), 1.0),
        ((0.0, 100.0), 0.0),
        ((0.0, 100.0), 30.0),
        ((0.0, float("inf")), 1.0),
        ((0.0, 100.0), float("nan")),
    ],
)
def test_table_bad_range_or_step(rng, step):
    with pytest.raises(OptionError):
        _table(rng=rng, step=step)


def test_order_marks():
    # marks at m λ/(2 n cos θ_f) with λ = 550 nm (common practice); tol 1e-9
    stack = Stack.from_names(film="sio2", substrate="si")
    n = complex(stack.film.index(550.0)).real
    marks = order_marks_nm(stack, angle_deg=0.0, max_nm=1000.0)
    period = 550.0 / (2 * n)
    np.testing.assert_allclose(marks, period * np.arange(1, marks.size + 1), atol=1e-9)
    assert marks[-1] <= 1000.0 < marks[-1] + period
