"""Tests of fringemap.optics.stack against tmm, closed forms and physical invariants."""

from __future__ import annotations

import numpy as np
import pytest
import tmm
from hypothesis import given, settings
from hypothesis import strategies as st

from fringemap.errors import OptionError
from fringemap.optics.stack import Stack, reflectance, stack_optics

TOL_TMM = 1e-9  # agreement with tmm (Byrnes, arXiv:1603.02720), brief's tolerance
THICKNESSES = np.array([0.0, 12.5, 97.0, 250.0, 640.0, 1500.0])
WAVELENGTHS = np.array([400.0, 455.0, 532.0, 589.0, 633.0, 700.0, 760.0])


def _tmm_rt(stack: Stack, t: float, wl: float, angle_deg: float, pol: str) -> tuple[float, float]:
    """R and T from tmm.coh_tmm, one wavelength per call (the tmm API)."""
    n_list = [complex(stack.ambient.index(wl)), complex(stack.film.index(wl))]
    d_list = [np.inf, float(t)]
    for layer in stack.layers:
        n_list.append(complex(layer.material.index(wl)))
        d_list.append(layer.thickness_nm)
    n_list.append(complex(stack.substrate.index(wl)))
    d_list.append(np.inf)
    pols = ("s", "p") if pol == "unpolarised" else (pol,)
    res = [tmm.coh_tmm(p, n_list, d_list, np.deg2rad(angle_deg), wl) for p in pols]
    return float(np.mean([r["R"] for r in res])), float(np.mean([r["T"] for r in res]))


def _compare_with_tmm(stack: Stack, angle_deg: float, pol: str) -> None:
    got = stack_optics(
        stack,
        thickness_nm=THICKNESSES,
        wavelength_nm=WAVELENGTHS,
        angle_deg=angle_deg,
        polarisation=pol,
    )
    assert got.R.shape == got.T.shape == (THICKNESSES.size, WAVELENGTHS.size)
    want_R = np.empty_like(got.R)
    want_T = np.empty_like(got.T)
    for i, t in enumerate(THICKNESSES):
        for j, wl in enumerate(WAVELENGTHS):
            want_R[i, j], want_T[i, j] = _tmm_rt(stack, t, wl, angle_deg, pol)
    np.testing.assert_allclose(got.R, want_R, rtol=0, atol=TOL_TMM)
    np.testing.assert_allclose(got.T, want_T, rtol=0, atol=TOL_TMM)


STACKS = {
    # free soap film in air
    "free-film": lambda: Stack.from_names(film="soap", substrate="air"),
    # thermal oxide on absorbing silicon
    "sio2-on-si": lambda: Stack.from_names(film="sio2", substrate="si"),
    # oxide over a fixed 80 nm nitride layer on silicon
    "two-layer": lambda: Stack.from_names(film="sio2", substrate="si", layers=[("si3n4", 80.0)]),
}
GEOMETRIES = [(0.0, "s"), (0.0, "p"), (0.0, "unpolarised")] + [
    (a, p) for a in (30.0, 45.0, 60.0) for p in ("s", "p", "unpolarised")
]


@pytest.mark.parametrize("stack_name", list(STACKS))
@pytest.mark.parametrize(("angle_deg", "pol"), GEOMETRIES)
def test_reflectance_and_transmittance_match_tmm(stack_name, angle_deg, pol):
    # tmm.coh_tmm (Byrnes, arXiv:1603.02720); unpolarised = mean of s and p; tol 1e-9
    _compare_with_tmm(STACKS[stack_name](), angle_deg, pol)


def test_unpolarised_is_mean_of_s_and_p():
    # common practice: unpolarised light is an equal incoherent mix of s and p; tol 1e-15
    stack = STACKS["two-layer"]()
    kw = dict(thickness_nm=THICKNESSES, wavelength_nm=WAVELENGTHS, angle_deg=50.0)
    s = stack_optics(stack, polarisation="s", **kw)
    p = stack_optics(stack, polarisation="p", **kw)
    u = stack_optics(stack, polarisation="unpolarised", **kw)
    np.testing.assert_allclose(u.R, 0.5 * (s.R + p.R), rtol=0, atol=1e-15)
    np.testing.assert_allclose(u.T, 0.5 * (s.T + p.T), rtol=0, atol=1e-15)
    assert np.max(np.abs(s.R - p.R)) > 0.01  # the geometry really separates s and p


def test_three_fixed_layers_match_tmm():
    # tmm.coh_tmm (Byrnes 2016) with several under-layers, one absorbing; tol 1e-9
    stack = Stack.from_names(
        film="photoresist",
        substrate="si",
        layers=[("2.3+0.05j", 35.0), ("sio2", 120.0), ("si3n4", 60.0)],
    )
    _compare_with_tmm(stack, 40.0, "unpolarised")


# ---------------------------------------------------------------------------
# Closed forms
# ---------------------------------------------------------------------------


def test_quarter_wave_mgf2_on_glass():
    # Hecht, Optics, thin-film chapter: d = λ/(4 n) = 99.64 nm and
    # R = ((n_s - n²)/(n_s + n²))² = 1.26 % at 550 nm; tolerance 0.005 percentage points
    n_film, n_glass, wl = 1.38, 1.52, 550.0
    d = wl / (4 * n_film)
    assert d == pytest.approx(99.64, abs=0.005)
    stack = Stack.from_names(film=n_film, substrate=n_glass)
    r = reflectance(stack, thickness_nm=[d, 99.64], wavelength_nm=[wl], angle_deg=0.0)
    expected = ((n_glass - n_film**2) / (n_glass + n_film**2)) ** 2
    assert r[0, 0] == pytest.approx(expected, abs=1e-12)  # closed form, rounding only
    assert 100 * r[:, 0] == pytest.approx([1.26, 1.26], abs=0.005)
    # and 550 nm is the minimum of R(λ) for that thickness (quarter-wave condition)
    wls = np.linspace(500.0, 600.0, 1001)
    curve = reflectance(stack, thickness_nm=[d], wavelength_nm=wls, angle_deg=0.0)[0]
    assert wls[np.argmin(curve)] == pytest.approx(wl, abs=0.1)  # grid step 0.1 nm


def _extrema(wls: np.ndarray, curve: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Interior local minima and maxima of a sampled curve (wavelengths)."""
    d = np.diff(curve)
    minima = wls[1:-1][(d[:-1] < 0) & (d[1:] >= 0)]
    maxima = wls[1:-1][(d[:-1] > 0) & (d[1:] <= 0)]
    return minima, maxima


PHASE_WLS = np.arange(385.0, 775.0 + 1e-9, 0.01)
THICK_NM = 1000.0


def test_free_film_phase_rule():
    # Hecht, Optics: a film with a half-wave reflection loss at one face only (n = 1.33 in
    # air) has minima where 2nt = mλ and maxima where 2nt = (m + ½)λ; grid 0.01 nm, tol 0.02 nm
    n = 1.33
    stack = Stack.from_names(film=n, substrate="air")
    curve = reflectance(stack, thickness_nm=[THICK_NM], wavelength_nm=PHASE_WLS, angle_deg=0.0)[0]
    minima, maxima = _extrema(PHASE_WLS, curve)
    opd = 2 * n * THICK_NM
    m = np.arange(1, 20)
    want_min = np.sort([x for x in opd / m if 385 < x < 775])
    want_max = np.sort([x for x in opd / (m + 0.5) if 385 < x < 775])
    assert minima.size == want_min.size and maxima.size == want_max.size
    np.testing.assert_allclose(np.sort(minima), want_min, atol=0.02)
    np.testing.assert_allclose(np.sort(maxima), want_max, atol=0.02)
    assert np.all(curve.min() >= 0) and curve.min() < 1e-12  # minima are exactly zero


def test_film_on_higher_index_substrate_phase_rule():
    # Hecht, Optics: with half-wave losses at both faces (1.46 on 3.9) the rule reverses:
    # maxima at 2nt = mλ, minima at 2nt = (m + ½)λ; grid 0.01 nm, tol 0.02 nm
    n = 1.46
    stack = Stack.from_names(film=n, substrate=3.9)
    curve = reflectance(stack, thickness_nm=[THICK_NM], wavelength_nm=PHASE_WLS, angle_deg=0.0)[0]
    minima, maxima = _extrema(PHASE_WLS, curve)
    opd = 2 * n * THICK_NM
    m = np.arange(1, 20)
    want_max = np.sort([x for x in opd / m if 385 < x < 775])
    want_min = np.sort([x for x in opd / (m + 0.5) if 385 < x < 775])
    assert minima.size == want_min.size and maxima.size == want_max.size
    np.testing.assert_allclose(np.sort(minima), want_min, atol=0.02)
    np.testing.assert_allclose(np.sort(maxima), want_max, atol=0.02)
    # maxima equal the bare-substrate reflectance (half-wave layer is absent); tol 1e-12
    bare = ((3.9 - 1) / (3.9 + 1)) ** 2
    assert curve.max() == pytest.approx(bare, abs=1e-12)


# ---------------------------------------------------------------------------
# Incoherent back face of a thick substrate
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(("angle_deg", "pol"), [(0.0, "unpolarised"), (45.0, "s"), (45.0, "p")])
def test_glass_slide_two_faces_incoherent(angle_deg, pol):
    # common practice (incoherent multiple reflections): a lossless slab with single-face
    # reflectance R₁ has R = 2R₁/(1 + R₁) and T = (1 - R₁)/(1 + R₁); film = slab material,
    # so any film thickness is invisible; tol 1e-12
    n = 1.5
    stack = Stack.from_names(film=n, substrate=n, substrate_thickness_nm=1e6)
    out = stack_optics(
        stack,
        thickness_nm=[0.0, 150.0],
        wavelength_nm=WAVELENGTHS,
        angle_deg=angle_deg,
        polarisation=pol,
    )
    th = np.deg2rad(angle_deg)
    ci, ct = np.cos(th), np.sqrt(1 - (np.sin(th) / n) ** 2)
    if pol == "p":
        r1 = ((n * ci - ct) / (n * ci + ct)) ** 2  # Fresnel (Hecht, Optics)
    else:
        r1 = ((ci - n * ct) / (ci + n * ct)) ** 2
    np.testing.assert_allclose(out.R, 2 * r1 / (1 + r1), rtol=0, atol=1e-12)
    np.testing.assert_allclose(out.T, (1 - r1) / (1 + r1), rtol=0, atol=1e-12)
    np.testing.assert_allclose(out.A, 0.0, atol=1e-12)
    if angle_deg == 0.0:
        assert out.R[0, 0] == pytest.approx(0.08 / 1.04, abs=1e-12)  # R₁ = 0.04 at n = 1.5


@pytest.mark.parametrize(("angle_deg", "pol"), [(0.0, "s"), (45.0, "s"), (45.0, "p")])
def test_thick_substrate_matches_tmm_incoherent(angle_deg, pol):
    # tmm.inc_tmm (Byrnes 2016) with a coherent film + layer on an incoherent 1 mm
    # weakly absorbing slab; tol 1e-9
    n_slab = 1.52 + 2e-7j
    stack = Stack.from_names(
        film="sio2", substrate=n_slab, layers=[("si3n4", 50.0)], substrate_thickness_nm=1e6
    )
    t = np.array([0.0, 60.0, 333.0])
    wls = np.array([420.0, 550.0, 690.0])
    got = stack_optics(
        stack, thickness_nm=t, wavelength_nm=wls, angle_deg=angle_deg, polarisation=pol
    )
    for i, ti in enumerate(t):
        for j, wl in enumerate(wls):
            n_list = [
                1.0,
                complex(stack.film.index(wl)),
                complex(stack.layers[0].material.index(wl)),
            ]
            res = tmm.inc_tmm(
                pol,
                n_list + [n_slab, 1.0],
                [np.inf, ti, 50.0, 1e6, np.inf],
                ["i", "c", "c", "i", "i"],
                np.deg2rad(angle_deg),
                wl,
            )
            assert got.R[i, j] == pytest.approx(res["R"], abs=TOL_TMM)
            assert got.T[i, j] == pytest.approx(res["T"], abs=TOL_TMM)


# ---------------------------------------------------------------------------
# Properties (hypothesis)
# ---------------------------------------------------------------------------

real_index = st.floats(1.0, 4.0)
lossy_index = st.builds(complex, st.floats(1.0, 4.5), st.floats(0.0, 3.0))
angles = st.floats(0.0, 75.0)
pols = st.sampled_from(["s", "p", "unpolarised"])
thick = st.floats(0.0, 2000.0)
wavelength = st.floats(380.0, 780.0)
PROPS = settings(max_examples=40, deadline=None)


@PROPS
@given(
    film=lossy_index,
    layer=lossy_index,
    layer_d=st.floats(0.0, 300.0),
    sub=lossy_index,
    t=thick,
    wl=wavelength,
    angle=angles,
    pol=pols,
)
def test_energy_balance_absorbing(film, layer, layer_d, sub, t, wl, angle, pol):
    # energy conservation (common practice): R + T + A = 1, 0 <= R, T <= 1, A >= 0; tol 1e-12
    stack = Stack.from_names(film=film, substrate=sub, layers=[(layer, layer_d)])
    out = stack_optics(
        stack, thickness_nm=[t], wavelength_nm=[wl], angle_deg=angle, polarisation=pol
    )
    assert np.all(np.isfinite(out.R)) and np.all(np.isfinite(out.T))
    assert -1e-12 <= out.R[0, 0] <= 1 + 1e-12
    assert -1e-12 <= out.T[0, 0] <= 1 + 1e-12
    assert out.A[0, 0] >= -1e-12
    assert out.R[0, 0] + out.T[0, 0] + out.A[0, 0] == pytest.approx(1.0, abs=1e-12)


@PROPS
@given(
    film=real_index,
    layer=real_index,
    layer_d=st.floats(0.0, 300.0),
    sub=real_index,
    t=thick,
    wl=wavelength,
    angle=st.floats(0.0, 60.0),
    pol=pols,
)
def test_energy_balance_lossless(film, layer, layer_d, sub, t, wl, angle, pol):
    # lossless stack, no total internal reflection (ambient n = 1 <= all indices):
    # A = 0 (common practice); tol 1e-10
    stack = Stack.from_names(film=film, substrate=sub, layers=[(layer, layer_d)])
    out = stack_optics(
        stack, thickness_nm=[t], wavelength_nm=[wl], angle_deg=angle, polarisation=pol
    )
    assert 0.0 <= out.R[0, 0] <= 1.0 + 1e-12
    assert out.A[0, 0] == pytest.approx(0.0, abs=1e-10)


@PROPS
@given(
    film=real_index,
    sub=lossy_index,
    t=st.floats(0.0, 1500.0),
    wl=wavelength,
    angle=angles,
    pol=pols,
)
def test_lossless_film_is_periodic_in_thickness(film, sub, t, wl, angle, pol):
    # a lossless film's phase is 4π n t cos θ_f / λ, so R repeats with period
    # λ / (2 n cos θ_f) at fixed λ (common practice); tol 1e-9
    cos_f = np.sqrt(1 - (np.sin(np.deg2rad(angle)) / film) ** 2)
    period = wl / (2 * film * cos_f)
    stack = Stack.from_names(film=film, substrate=sub)
    r = reflectance(
        stack,
        thickness_nm=[t, t + period, t + 3 * period],
        wavelength_nm=[wl],
        angle_deg=angle,
        polarisation=pol,
    )[:, 0]
    np.testing.assert_allclose(r, r[0], rtol=0, atol=1e-9)


@PROPS
@given(film=lossy_index, sub=lossy_index, wl=wavelength, angle=angles)
def test_zero_thickness_gives_bare_substrate_fresnel(film, sub, wl, angle):
    # Fresnel equations at the ambient/substrate interface (Hecht, Optics); tol 1e-10
    th = np.deg2rad(angle)
    ci = np.cos(th)
    ct = np.sqrt(1 - (np.sin(th) / sub) ** 2 + 0j)
    rs = abs((ci - sub * ct) / (ci + sub * ct)) ** 2
    rp = abs((sub * ci - ct) / (sub * ci + ct)) ** 2
    stack = Stack.from_names(film=film, substrate=sub)
    kw = dict(thickness_nm=[0.0], wavelength_nm=[wl], angle_deg=angle)
    assert reflectance(stack, polarisation="s", **kw)[0, 0] == pytest.approx(rs, abs=1e-10)
    assert reflectance(stack, polarisation="p", **kw)[0, 0] == pytest.approx(rp, abs=1e-10)
    assert reflectance(stack, **kw)[0, 0] == pytest.approx(0.5 * (rs + rp), abs=1e-10)


@PROPS
@given(
    film=real_index,
    layer=real_index,
    sub=real_index,
    t=thick,
    layer_d=st.floats(0.0, 500.0),
    wl=wavelength,
    angle=st.floats(0.0, 70.0),
    pol=st.sampled_from(["s", "p"]),
)
def test_reversed_lossless_stack_keeps_transmittance(film, layer, sub, t, layer_d, wl, angle, pol):
    # reciprocity (common practice): T is the same lit from either side, with the angle in
    # the exit medium given by Snell's law; tol 1e-9
    forward = Stack.from_names(film=film, substrate=sub, layers=[(layer, layer_d)])
    backward = Stack.from_names(film=layer, substrate=1.0, ambient=sub, layers=[(film, t)])
    angle_back = np.rad2deg(np.arcsin(np.sin(np.deg2rad(angle)) / sub))
    t_fwd = stack_optics(
        forward, thickness_nm=[t], wavelength_nm=[wl], angle_deg=angle, polarisation=pol
    ).T[0, 0]
    t_back = stack_optics(
        backward, thickness_nm=[layer_d], wavelength_nm=[wl], angle_deg=angle_back, polarisation=pol
    ).T[0, 0]
    assert t_back == pytest.approx(t_fwd, abs=1e-9)


# ---------------------------------------------------------------------------
# Input checking and shapes
# ---------------------------------------------------------------------------


def test_shapes_and_broadcasting():
    # API contract (stack_optics docstring): arrays of shape (T, W)
    stack = STACKS["sio2-on-si"]()
    out = stack_optics(stack, thickness_nm=100.0, wavelength_nm=550.0, angle_deg=0.0)
    assert out.R.shape == (1, 1)
    out = stack_optics(
        stack, thickness_nm=np.arange(5.0), wavelength_nm=WAVELENGTHS, angle_deg=10.0
    )
    assert out.R.shape == out.T.shape == out.A.shape == (5, WAVELENGTHS.size)
    assert out.R.flags.c_contiguous


@pytest.mark.parametrize(
    "kwargs",
    [
        dict(angle_deg=90.0),
        dict(angle_deg=-1.0),
        dict(angle_deg=float("nan")),
        dict(thickness_nm=[-1.0]),
        dict(thickness_nm=[np.nan]),
        dict(thickness_nm=[[1.0, 2.0]]),
        dict(wavelength_nm=[0.0]),
        dict(polarisation="circular"),
        dict(numerical_aperture=1.0),
    ],
)
def test_bad_arguments_raise_option_error(kwargs):
    # common practice: invalid geometry and grids are user errors (OptionError, exit 2)
    args = dict(thickness_nm=[100.0], wavelength_nm=[550.0], angle_deg=0.0)
    args.update(kwargs)
    with pytest.raises(OptionError):
        stack_optics(STACKS["sio2-on-si"](), **args)


def test_absorbing_ambient_is_refused():
    # common practice: the incidence medium must be lossless for R and T to be defined
    stack = Stack.from_names(film="sio2", substrate="si", ambient="1.5+0.1j")
    with pytest.raises(OptionError, match="transparent"):
        reflectance(stack, thickness_nm=[10.0], wavelength_nm=[550.0], angle_deg=0.0)


def test_negative_layer_thickness_is_refused():
    # common practice: a thickness is >= 0
    with pytest.raises(OptionError):
        Stack.from_names(film="sio2", substrate="si", layers=[("si3n4", -5.0)])


def test_describe_names_every_material():
    # API contract (Stack.describe docstring)
    d = STACKS["two-layer"]().describe()
    assert d["film"]["name"] == "sio2" and d["substrate"]["name"] == "si"
    assert d["layers"] == [
        {"name": "si3n4", "source": d["layers"][0]["source"], "thickness_nm": 80.0}
    ]
