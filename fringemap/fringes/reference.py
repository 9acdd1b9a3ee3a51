"""What fixes a fringe region's sign and absolute thickness: anchors, hints, colours, lines.

Each function here takes one :class:`Region` (a connected area of unwrapped
fringes with relative thickness ``t_rel``, nm) and, when its evidence is
clear, sets the region's ``sign`` (+1: thickness grows with the unwrapped
phase) and ``offset`` (nm, ``t = sign · t_rel + offset``), recording where
each came from; otherwise it leaves them open and may add a note.

With two lines the phase difference ``φ1 − φ2`` varies as a fringe of the
synthetic wavelength ``Λ = λ1 λ2 / |λ1 − λ2|`` [1]_, so the film thickness is
known without ambiguity over ``Λ / (2 n cos θ)`` instead of ``λ / (2 n cos θ)``
(with dispersion, ``1 / (2 |k1 − k2|)``, ``k = n cos θ / λ``). Three lines
extend it further; :func:`unambiguous_range_nm` finds the range numerically.

References
----------
.. [1] Y.-Y. Cheng & J. C. Wyant, "Two-wavelength phase shifting
   interferometry", Appl. Opt. 23, 4539 (1984), doi:10.1364/AO.23.004539.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from ..errors import OptionError
from .source import band_reflectance, fringe_wavenumber

__all__ = [
    "Region",
    "unambiguous_range_nm",
    "model_offset",
    "sign_from_anchors",
    "sign_from_hints",
    "sign_from_positivity",
    "apply_colour",
    "apply_lines",
    "value_at",
]


def unambiguous_range_nm(wavenumbers: Sequence[float], *, tolerance: float = 0.05) -> float:
    """Thickness range over which several lines' phases single out one thickness, nm.

    Parameters
    ----------
    wavenumbers : sequence of float
        ``n cos θ_film / λ`` of each line, 1/nm.
    tolerance : float
        Fraction of a fringe within which a phase counts as having returned.

    Notes
    -----
    The phase difference of two lines advances by one fringe per
    ``1 / (2 |k1 − k2|)`` of thickness, which is ``Λ / (2 n cos θ)`` for the
    synthetic wavelength ``Λ = λ1 λ2 / |λ1 − λ2|`` (Cheng & Wyant 1984) when
    dispersion is neglected. With three lines the range is the thinnest
    nonzero thickness at which both differences (to the shortest line)
    return to within ``tolerance`` of a whole fringe together, found on a
    grid of 1 % of the shortest pairwise range. One line: its own fringe period.
    """
    ks = np.asarray(wavenumbers, dtype=np.float64)
    if ks.size < 2:
        return float(1.0 / (2.0 * ks[0]))
    dk = np.abs(ks - ks.max())
    dk = dk[dk > 0]
    if dk.size == 0:
        raise OptionError("two lines have the same fringe period", where="--lines")
    pairs = 1.0 / (2.0 * dk)
    if dk.size == 1:
        return float(pairs[0])
    step = pairs.min() / 100
    left = False  # the phases must first leave their t = 0 agreement
    for start in range(0, 200):
        t = step * np.arange(start * 100_000 + 1, (start + 1) * 100_000 + 1)
        frac = (2 * t[:, None] * dk[None, :]) % 1.0
        ok = np.all(np.minimum(frac, 1 - frac) < tolerance, axis=1)
        if not left:
            away = np.flatnonzero(~ok)
            if not away.size:
                continue
            left = True
            ok[: away[0]] = False
        if ok.any():
            return float(t[np.argmax(ok)])
    return float(step * 200 * 100_000)


def model_offset(stack, src, angle_deg) -> float:
    """ψ in ``φ = 4π k t + ψ``: phase of the band-averaged reflectance at t = 0, radians."""
    k = fringe_wavenumber(stack, src, angle_deg=angle_deg)
    t = np.linspace(0, 4 / (2 * k), 257)[:-1]
    r = band_reflectance(stack, src, thickness_nm=t, angle_deg=angle_deg)
    x = 4 * np.pi * k * t
    b, c = 2 * np.mean(r * np.cos(x)), 2 * np.mean(r * np.sin(x))
    return float(np.arctan2(-c, b))


@dataclass
class Region:
    label: int
    pixels: np.ndarray  # flat indices
    sign: int = 0
    offset: float | None = None
    sign_from: str = ""
    offset_from: str = ""
    notes: list = field(default_factory=list)

    def record(self) -> dict:
        return {
            "region": self.label,
            "pixels": int(self.pixels.size),
            "sign": self.sign,
            "sign_from": self.sign_from or None,
            "offset_nm": None if self.offset is None else float(self.offset),
            "offset_from": self.offset_from or None,
            "notes": self.notes,
        }


def sign_from_anchors(reg, anchors_r, period):
    tr = np.array([a[0] for a in anchors_r])
    ta = np.array([a[1] for a in anchors_r])
    if tr.size >= 2 and np.ptp(tr) >= period / 4 and np.ptp(ta) > 0:
        cov = np.sum((tr - tr.mean()) * (ta - ta.mean()))
        if cov != 0:
            reg.sign, reg.sign_from = int(np.sign(cov)), "anchors"


def sign_from_hints(reg, hints_r, t_rel_r):
    med = float(np.median(t_rel_r))
    votes = [np.sign(v - med) for v in hints_r if v != med]
    total = float(np.sum(votes))
    if total:
        reg.sign, reg.sign_from = int(np.sign(total)), "thicker-at"
        if abs(total) < len(votes):
            reg.notes.append("thicker-at hints disagree; the majority was used")


def apply_colour(reg, t_rel_r, colour_r, period):
    """Sign (if still open) and offset of a region from confident colour pixels."""
    ok = np.isfinite(colour_r)
    if ok.sum() < max(200, 0.02 * ok.size):
        return
    tc, tr = colour_r[ok], t_rel_r[ok]
    signs = [reg.sign] if reg.sign else ([1, -1] if np.std(tr) >= period / 4 else [])
    best = None
    for s in signs:
        off = float(np.median(tc - s * tr))
        res = float(np.median(np.abs(tc - s * tr - off)))
        if best is None or res < best[2]:
            best = (s, off, res)
    if best is None:
        return
    if best[2] > period / 4:
        reg.notes.append(
            f"colour map and fringes disagree (median {best[2]:.0f} nm); colour not used"
        )
        return
    if not reg.sign:
        reg.sign, reg.sign_from = best[0], "colour"
    if reg.offset is None:
        reg.offset, reg.offset_from = best[1], "colour"


def apply_lines(reg, phi_u_ref, phis, ks, psis, ref, t_range, rng, *, max_mismatch, min_margin):
    """Sign and/or fringe order of a region from the several lines' phases."""
    n = phi_u_ref.size
    pick = rng.choice(n, size=min(n, 20_000), replace=False) if n > 20_000 else np.arange(n)
    pu = phi_u_ref[pick]
    others = [i for i in range(len(ks)) if i != ref]
    kr = ks[ref]
    signs = [reg.sign] if reg.sign else [1, -1]
    results = []
    for s in signs:
        base = (s * pu - psis[ref]) / (4 * np.pi * kr)
        med = float(np.median(base))
        per = 1 / (2 * kr)
        m_lo = int(np.ceil((t_range[0] - med) / per))
        m_hi = int(np.floor((t_range[1] - med) / per))
        if m_hi < m_lo:
            continue
        ms = np.arange(m_lo, m_hi + 1)
        t = base[None, :] + ms[:, None] * per  # (M, n)
        score = np.zeros(ms.size)
        for i in others:
            pi = s * phis[i][pick]
            score += np.mean(1 - np.cos(pi[None, :] - 4 * np.pi * ks[i] * t - psis[i]), axis=1)
        score /= len(others)
        for m, sc in zip(ms, score, strict=True):
            results.append((float(sc), s, float(med + m * per), int(m)))
    if not results:
        return
    results.sort()
    best = results[0]
    runner = results[1][0] if len(results) > 1 else np.inf
    if best[0] > max_mismatch or runner - best[0] < min_margin:
        reg.notes.append(
            f"the lines' phases do not single out one fringe order "
            f"(mismatch {best[0]:.2f}, runner-up {runner:.2f})"
        )
        return
    s, m = best[1], best[3]
    if not reg.sign:
        reg.sign, reg.sign_from = s, "lines"
    reg.offset = float((-psis[ref] + 2 * np.pi * m) / (4 * np.pi * kr))
    reg.offset_from = "lines"


def sign_from_positivity(reg, t_rel_r, anchor, period):
    t_rel_a, t_a = anchor
    bad = {}
    for s in (1, -1):
        t = t_a + s * (t_rel_r - t_rel_a)
        bad[s] = float(np.mean(t < -period / 2))
    ok = [s for s in (1, -1) if bad[s] <= 0.001]
    if len(ok) == 1 and bad[-ok[0]] > 0.01:
        reg.sign, reg.sign_from = ok[0], "non-negative thickness"


def value_at(field_: np.ndarray, labels: np.ndarray, x: float, y: float, radius: int = 4):
    """(value at (x, y), label) from a plane fitted to the labelled pixels within
    ``radius`` px (those of the nearest pixel's region), or None if there are none."""
    h, w = labels.shape
    xi, yi = int(round(x)), int(round(y))
    y0, y1 = max(0, yi - radius), min(h, yi + radius + 1)
    x0, x1 = max(0, xi - radius), min(w, xi + radius + 1)
    lab = labels[y0:y1, x0:x1]
    if not (lab > 0).any():
        return None
    yy, xx = np.mgrid[y0:y1, x0:x1].astype(np.float64)
    d = np.where(lab > 0, (yy - y) ** 2 + (xx - x) ** 2, np.inf)
    j = np.unravel_index(np.argmin(d), d.shape)
    near = (lab == lab[j]) & (d <= radius**2)
    v = field_[y0:y1, x0:x1][near]
    if v.size >= 6:
        a = np.column_stack([np.ones(v.size), xx[near] - x, yy[near] - y])
        coef, *_ = np.linalg.lstsq(a, v, rcond=None)
        return float(coef[0]), int(lab[j])
    return float(np.median(v)), int(lab[j])
