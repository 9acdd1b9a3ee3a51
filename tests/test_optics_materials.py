"""Tests of fringemap.optics.materials: published indices and material specifications."""

from __future__ import annotations

import numpy as np
import pytest

from fringemap.errors import OptionError
from fringemap.optics.materials import (
    Material,
    builtin_material_names,
    describe_builtins,
    parse_material,
)
from fringemap.optics.stack import Stack, reflectance

# Fused silica Sellmeier terms (λ in µm): Malitson, J. Opt. Soc. Am. 55, 1205 (1965).
MALITSON_B = (0.6961663, 0.4079426, 0.8974794)
MALITSON_C = (0.0684043**2, 0.1162414**2, 9.896161**2)  # µm²


def _malitson(wl_nm: np.ndarray) -> np.ndarray:
    """Malitson's fused-silica formula, written out independently of the package."""
    lam2 = (np.asarray(wl_nm, dtype=float) / 1000.0) ** 2
    n2 = 1.0
    for b, c in zip(MALITSON_B, MALITSON_C, strict=True):
        n2 = n2 + b * lam2 / (lam2 - c)
    return np.sqrt(n2)


def _n(spec, wl_nm) -> complex:
    return complex(parse_material(spec).index(np.array([wl_nm]))[0])


# ---------------------------------------------------------------------------
# Built-in materials against published values
# ---------------------------------------------------------------------------


def test_fused_silica_index_at_helium_d_line():
    # Malitson 1965: n = 1.45846 at 587.6 nm; tolerance 1e-5 (last quoted digit)
    assert _n("sio2", 587.6) == pytest.approx(1.45846, abs=1e-5)


def test_water_index_at_sodium_d_line():
    # Daimon & Masumura, Appl. Opt. 46, 3811 (2007): n ≈ 1.3334 at 589 nm, 20 °C; tol 2e-4
    n = _n("water", 589.0)
    assert n.real == pytest.approx(1.3334, abs=2e-4)
    assert n.imag == 0.0


def test_silicon_nitride_index_at_hene_line():
    # Luke et al., Opt. Lett. 40, 4823 (2015): n ≈ 2.0395 at 632.8 nm; tol 2e-4
    assert _n("si3n4", 632.8).real == pytest.approx(2.0395, abs=2e-4)


def test_silicon_complex_index_at_550nm():
    # Green, Sol. Energy Mater. Sol. Cells 92, 1305 (2008): n + ik = 4.077 + 0.028i at 550 nm;
    # tolerance 1e-3 on n and on k (rounding of the published table)
    n = _n("si", 550.0)
    assert n.real == pytest.approx(4.077, abs=1e-3)
    assert n.imag == pytest.approx(0.028, abs=1e-3)


def test_bare_silicon_reflectance_at_550nm():
    # R = |(1 - N)/(1 + N)|² with N from Green 2008 gives ≈ 0.367; tolerance 0.002
    n = _n("si", 550.0)
    fresnel = abs((1 - n) / (1 + n)) ** 2
    assert fresnel == pytest.approx(0.367, abs=0.002)
    # and the stack code agrees for a zero-thickness film (Fresnel, common practice); tol 1e-12
    stack = Stack.from_names(film="sio2", substrate="si")
    r = reflectance(stack, thickness_nm=[0.0], wavelength_nm=[550.0], angle_deg=0.0)
    assert r[0, 0] == pytest.approx(fresnel, abs=1e-12)


def test_fused_silica_follows_malitson_across_visible():
    # built-in sio2 is Malitson's formula (Malitson 1965); tolerance 1e-6 (database rounding)
    wl = np.linspace(380.0, 780.0, 41)
    np.testing.assert_allclose(parse_material("sio2").index(wl).real, _malitson(wl), atol=1e-6)


def test_soap_is_water_plus_offset():
    # catalogue states soap = Daimon & Masumura water + 0.005 (assumption, from memory)
    wl = np.linspace(400.0, 700.0, 7)
    diff = parse_material("soap").index(wl) - parse_material("water").index(wl)
    np.testing.assert_allclose(diff, 0.005, atol=1e-12)


@pytest.mark.parametrize("name", builtin_material_names())
def test_every_builtin_covers_visible_and_is_physical(name):
    # n > 0 and k >= 0 across 380-780 nm, the colour grid (sign convention of Byrnes,
    # arXiv:1603.02720)
    wl = np.linspace(380.0, 780.0, 11)
    n = parse_material(name).index(wl)
    assert n.shape == wl.shape
    assert np.all(np.isfinite(n)) and np.all(n.real > 0) and np.all(n.imag >= 0)


def test_describe_builtins_lists_every_material_with_a_source():
    # API contract: every built-in names where its numbers come from
    rows = describe_builtins()
    assert {r["name"] for r in rows} == set(builtin_material_names())
    assert all(r["source"] and r["description"] for r in rows)


# ---------------------------------------------------------------------------
# Numbers and closed-form models
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("spec", "expected"),
    [
        ("1.46", 1.46),
        (" 1.46 ", 1.46),
        ("3.9+0.02j", 3.9 + 0.02j),
        ("3.9+0.02i", 3.9 + 0.02j),
        ("3.9+0.02J", 3.9 + 0.02j),
        (1.5, 1.5),
        (2, 2.0),
        (2.0 + 0.1j, 2.0 + 0.1j),
    ],
)
def test_constant_indices(spec, expected):
    # exact: a constant index is returned unchanged at every wavelength (common practice)
    wl = np.array([[400.0, 500.0], [600.0, 700.0]])
    n = parse_material(spec).index(wl)
    assert n.shape == wl.shape and n.dtype == np.complex128
    np.testing.assert_array_equal(n, np.full(wl.shape, complex(expected)))


def test_cauchy_two_and_three_terms():
    # n = A + B/λ² + C/λ⁴ with λ in µm (Cauchy's formula, from memory); tol 1e-12
    assert _n("cauchy:1.5,0.004", 500.0) == pytest.approx(1.5 + 0.004 / 0.25, abs=1e-12)
    assert _n("CAUCHY:1.5,0.004,0.0001", 500.0) == pytest.approx(
        1.5 + 0.004 / 0.25 + 0.0001 / 0.0625, abs=1e-12
    )


def test_sellmeier_text_equals_malitson_formula():
    # sellmeier:B1,C1,... with C in µm² (Sellmeier 1871) reproduces Malitson 1965; tol 1e-12
    pairs = []
    for b, c in zip(MALITSON_B, MALITSON_C, strict=True):
        pairs += [repr(b), repr(c)]
    mat = parse_material("sellmeier:" + ",".join(pairs))
    wl = np.linspace(380.0, 780.0, 81)
    n = mat.index(wl)
    np.testing.assert_allclose(n.real, _malitson(wl), rtol=0, atol=1e-12)
    np.testing.assert_array_equal(n.imag, 0.0)
    # Malitson 1965 quotes 1.45846 at 587.6 nm; tol 1e-5
    assert complex(mat.index(587.6)).real == pytest.approx(1.45846, abs=1e-5)


@pytest.mark.parametrize(
    "spec",
    [
        "1.5-0.1j",  # k < 0 is gain, not absorption (Byrnes 2016 convention)
        "nan",
        "inf",
        "0",
        "-1.5",
        float("nan"),
        complex(1.5, -0.01),
        True,
        "",
        "   ",
        None,
        "cauchy:",
        "cauchy:a,b",
        "cauchy:1.5,nan",
        "cauchy:-1,0",  # n <= 0 in the visible
        "sellmeier:1,2,3",  # odd count
        "sellmeier:1,0.36",  # pole at 600 nm: infinite index in the visible
        "db:main/SiO2",
        "db:main/SiO2/NoSuchPage",
        "db:main/NoSuchBook/x",
    ],
)
def test_bad_specifications_raise_option_error(spec):
    # common practice: every bad value is an OptionError (exit code 2), one line
    with pytest.raises(OptionError) as info:
        parse_material(spec, where="--film")
    assert info.value.exit_code == 2
    assert "\n" not in str(info.value)


def test_material_passes_through():
    # API contract (parse_material docstring)
    mat = parse_material("sio2")
    assert parse_material(mat) is mat
    assert isinstance(mat, Material)


def test_out_of_range_wavelength_raises():
    # common practice: extrapolating tabulated data is refused
    with pytest.raises(OptionError, match="nm only"):
        parse_material("si3n4").index(np.array([200.0, 500.0]))


# ---------------------------------------------------------------------------
# CSV tables
# ---------------------------------------------------------------------------


def _write(tmp_path, name: str, text: str) -> str:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


def test_csv_with_header_and_k(tmp_path):
    path = _write(
        tmp_path, "film.csv", "wavelength_nm,n,k\n400,1.60,0.02\n600,1.50,0.00\n800,1.40,0.01\n"
    )
    mat = parse_material(path)
    # linear interpolation between rows (module docstring); tol 1e-12
    n = mat.index(np.array([400.0, 500.0, 600.0, 700.0, 800.0]))
    np.testing.assert_allclose(n.real, [1.60, 1.55, 1.50, 1.45, 1.40], atol=1e-12)
    np.testing.assert_allclose(n.imag, [0.02, 0.01, 0.0, 0.005, 0.01], atol=1e-12)
    assert mat.range_nm == (400.0, 800.0)
    with pytest.raises(OptionError):
        mat.index(np.array([399.0]))


def test_csv_without_k_or_header(tmp_path):
    path = _write(tmp_path, "plain.csv", "# a comment\n350, 1.5\n\n850, 1.3\n")
    n = parse_material(path).index(np.array([350.0, 600.0, 850.0]))
    np.testing.assert_allclose(n, [1.5, 1.4, 1.3], atol=1e-12)  # k = 0 when absent; tol 1e-12


def test_csv_with_byte_order_mark(tmp_path):
    path = tmp_path / "bom.csv"
    path.write_text("wl,n\n400,1.5\n800,1.5\n", encoding="utf-8-sig")
    assert _n(str(path), 500.0) == pytest.approx(1.5, abs=1e-12)


@pytest.mark.parametrize(
    "text",
    [
        "wl,n,k\n400,1.5,-0.01\n800,1.5,0\n",  # k < 0
        "wl,n\n400,nan\n800,1.5\n",  # NaN
        "wl,n\n400,1.5\n800,inf\n",  # inf
        "wl,n\n400,1.5\n800,1.4\n600,1.45\n",  # wavelengths not increasing
        "wl,n\n400,1.5\n400,1.5\n",  # repeated wavelength
        "wl,n\n400\n800,1.5\n",  # missing column
        "wl,n\n400,1.5,0,9\n800,1.5,0,9\n",  # too many columns
        "wl,n\n400,1.5\n",  # a single row
        "wl,n\n",  # header only
        "wl,n\n400,1.5\n600,abc\n",  # not a number after the header
        "wl,n\n400,0\n800,1.5\n",  # n <= 0
    ],
)
def test_bad_csv_raises_option_error(tmp_path, text):
    # common practice: each malformed table is refused with a one-line OptionError
    path = _write(tmp_path, "bad.csv", text)
    with pytest.raises(OptionError) as info:
        parse_material(path)
    assert "\n" not in str(info.value)


def test_missing_csv_raises_option_error(tmp_path):
    with pytest.raises(OptionError, match="not found"):
        parse_material(str(tmp_path / "absent.csv"))


# ---------------------------------------------------------------------------
# Database pages, names and aliases
# ---------------------------------------------------------------------------


def test_database_page_matches_builtin():
    # the built-in sio2 is refractiveindex.info page main/SiO2/Malitson (catalogue); exact
    wl = np.linspace(400.0, 700.0, 31)
    db = parse_material("db:main/SiO2/Malitson")
    assert db.name == "db:main/SiO2/Malitson"
    np.testing.assert_array_equal(db.index(wl), parse_material("sio2").index(wl))
    # Malitson 1965: 1.45846 at 587.6 nm; tol 1e-5
    assert complex(db.index(587.6)).real == pytest.approx(1.45846, abs=1e-5)


@pytest.mark.parametrize(
    ("spec", "canonical"),
    [
        ("SiO2", "sio2"),
        ("SIO2", "sio2"),
        ("  sio2  ", "sio2"),
        ("Fused-Silica", "sio2"),
        ("thermal-oxide", "sio2"),
        ("Silicon", "si"),
        ("H2O", "water"),
        ("Soap-Film", "soap"),
        ("SiN", "si3n4"),
        ("BK7", "crown-glass"),
        ("Air", "air"),
    ],
)
def test_names_are_case_insensitive_and_aliases_resolve(spec, canonical):
    # exact equality with the canonical built-in
    wl = np.array([450.0, 550.0, 650.0])
    mat = parse_material(spec)
    assert mat.name == canonical
    np.testing.assert_array_equal(mat.index(wl), parse_material(canonical).index(wl))


@pytest.mark.parametrize(
    ("spec", "suggestion"),
    [("sio3", "sio2"), ("silcon", "silicon"), ("watr", "water"), ("Si3N5", "si3n4")],
)
def test_unknown_name_suggests_close_names_on_one_line(spec, suggestion):
    with pytest.raises(OptionError) as info:
        Stack.from_names(film=spec, substrate="si")
    message = str(info.value)
    assert message.startswith("--film:")
    assert "did you mean" in message and suggestion in message
    assert "\n" not in message
    assert info.value.exit_code == 2


def test_unknown_name_without_close_match():
    with pytest.raises(OptionError) as info:
        parse_material("unobtainium")
    assert "did you mean" not in str(info.value)
    assert "unknown material" in str(info.value)
