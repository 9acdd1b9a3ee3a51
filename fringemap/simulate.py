"""Synthetic photographs of thin films with a known thickness map: the project's test bench.

A simulated photo is made in three steps:

1. a thickness field (nm, float64, shape (H, W)) from the shape builders here
   (:func:`wedge`, :func:`bowl`, :func:`bump`, :func:`draining_film`,
   :func:`scratch`) or from a float TIFF in nm (:func:`read_thickness`);
2. physics: each film pixel's colour is the stack's reflectance spectrum, times
   the light, through the sensor. Colours are computed once on a fine
   thickness grid (0.25 nm) and interpolated per pixel;
3. photo formation (:func:`render_photo`), in this order: linear = exposure ×
   vignetting × lamp gradient × colour; Gaussian lens blur; clipping to 0-1;
   sRGB encoding; Gaussian noise on the encoded values (on linear values for
   float output), clipped again; quantisation to 8 or 16 bits; optional JPEG.

Colour spaces: with a CIE observer as sensor the linear colours are
white-balanced linear sRGB. With a camera sensor (``camera-a``, ``camera-b`` or
a CSV) they are white-balanced camera RGB, as a RAW pipeline delivers; the
sRGB encoding then treats camera RGB as if it had sRGB primaries (an
uncalibrated camera, no colour matrix). Out-of-gamut negative values are
clipped to 0, as a camera does.

The photos must test the measuring tool honestly, so render them with other
published material data than the tool's recipe uses. Any stack works::

    >>> from fringemap.optics.stack import Stack
    >>> stack = Stack.from_names(film="sio2", substrate="db:main/Si/Aspnes")
    >>> t = bowl((200, 200), centre_nm=480, edge_nm=540)
    >>> sim = render_photo(t, stack=stack, light="F11", film_mask=disc_mask(
    ...     (200, 200), radius=95))
    >>> sim.image.shape, sim.image.dtype
    ((200, 200, 3), dtype('uint8'))

(e.g. Si from ``db:main/Si/Schinke``, glass ``db:glass/soda-lime/Rubin-clear``
against the built-in crown glass, water ``db:main/H2O/Hale`` for soap.)
"""

from __future__ import annotations

import io
import json
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import cv2
import numpy as np
import tifffile

from . import __version__
from .colour.render import Renderer
from .colour.spectra import GRID_NM, parse_detector, parse_light
from .colour.transfer import srgb_encode
from .errors import InputFileError, OptionError, OutputError
from .optics.stack import Stack, reflectance

__all__ = [
    "wedge",
    "bowl",
    "bump",
    "draining_film",
    "scratch",
    "disc_mask",
    "frame_mask",
    "read_thickness",
    "render_photo",
    "SimulatedPhoto",
    "write_simulated",
    "SCENARIOS",
    "write_demo_images",
]

OUTPUTS = ("srgb8", "srgb16", "linear")
_CHUNK = 2048  # thicknesses per reflectance call


# ------------------------------------------------------------------------- helpers


def _shape(shape, where: str = "shape") -> tuple[int, int]:
    try:
        h, w = (int(v) for v in shape)
    except (TypeError, ValueError):
        raise OptionError(f"expected (H, W) in px, got {shape!r}", where=where) from None
    if h < 1 or w < 1 or (h, w) != tuple(shape):
        raise OptionError(f"expected two whole numbers >= 1 (px), got {shape!r}", where=where)
    return h, w


def _num(v, where: str, lo: float = -np.inf, hi: float = np.inf, *, hi_open=False) -> float:
    if isinstance(v, bool) or not isinstance(v, int | float | np.floating | np.integer):
        raise OptionError(f"expected a number, got {type(v).__name__} {v!r}", where=where)
    v = float(v)
    if not np.isfinite(v) or v < lo or v > hi or (hi_open and v == hi):
        raise OptionError(f"expected a number in [{lo:g}, {hi:g}], got {v!r}", where=where)
    return v


def _grid(shape):
    h, w = shape
    return np.arange(h, dtype=np.float64)[:, None], np.arange(w, dtype=np.float64)[None, :]


def _centre(shape, centre, where="centre") -> tuple[float, float]:
    h, w = shape
    if centre is None:
        return (w - 1) / 2, (h - 1) / 2
    try:
        x, y = (float(v) for v in centre)
    except (TypeError, ValueError):
        raise OptionError(f"expected (x, y) in px, got {centre!r}", where=where) from None
    return x, y


# -------------------------------------------------------------- thickness fields


def wedge(shape, *, t0_nm: float, t1_nm: float, axis: int | str = "x") -> np.ndarray:
    """A linear wedge from ``t0_nm`` at the first pixel to ``t1_nm`` at the last, float64 (H, W).

    ``axis`` is ``"x"`` / 1 (left to right) or ``"y"`` / 0 (top to bottom).
    """
    h, w = _shape(shape)
    ax = {"x": 1, "y": 0, 1: 1, 0: 0}.get(axis)
    if ax is None:
        raise OptionError(f"expected axis 'x', 'y', 1 or 0, got {axis!r}", where="axis")
    t0, t1 = _num(t0_nm, "t0_nm"), _num(t1_nm, "t1_nm")
    ramp = np.linspace(t0, t1, (h, w)[ax])
    return np.broadcast_to(ramp[:, None] if ax == 0 else ramp[None, :], (h, w)).copy()


def bowl(
    shape, *, centre_nm: float, edge_nm: float, radius_px: float | None = None, centre=None
) -> np.ndarray:
    """A radial paraboloid: ``centre_nm`` at the centre, ``edge_nm`` at ``radius_px``, (H, W) nm.

    ``radius_px`` defaults to half the smaller side; beyond it the parabola
    continues. ``centre`` is (x, y) in px, default the image centre.
    """
    shape = _shape(shape)
    c0, c1 = _num(centre_nm, "centre_nm"), _num(edge_nm, "edge_nm")
    r0 = min(shape) / 2 if radius_px is None else _num(radius_px, "radius_px", 1e-9)
    cx, cy = _centre(shape, centre)
    y, x = _grid(shape)
    return c0 + (c1 - c0) * ((x - cx) ** 2 + (y - cy) ** 2) / r0**2


def bump(shape, *, base_nm: float, height_nm: float, sigma_px: float, centre=None) -> np.ndarray:
    """A Gaussian bump of ``height_nm`` (may be < 0) and width ``sigma_px`` on ``base_nm``, (H, W)."""
    shape = _shape(shape)
    base, height = _num(base_nm, "base_nm"), _num(height_nm, "height_nm")
    sigma = _num(sigma_px, "sigma_px", 1e-9)
    cx, cy = _centre(shape, centre)
    y, x = _grid(shape)
    return base + height * np.exp(-((x - cx) ** 2 + (y - cy) ** 2) / (2 * sigma**2))


def draining_film(
    shape,
    *,
    top_nm: float,
    bottom_nm: float,
    black_nm: float = 25.0,
    black_fraction: float = 0.15,
    wobble: float = 0.02,
) -> np.ndarray:
    """A vertical soap film draining under gravity, float64 (H, W) nm.

    A band of black film (``black_nm``) covers the top ``black_fraction`` of
    the rows, with a sharp, slightly wavy lower boundary. Below it the film
    thickens from ``top_nm`` to about ``bottom_nm`` at the last row, half linearly
    and half quadratically with depth; ``wobble`` (fraction of the height)
    bends the iso-thickness lines gently across x.
    """
    h, w = _shape(shape)
    top, bottom = _num(top_nm, "top_nm", 0), _num(bottom_nm, "bottom_nm", 0)
    black = _num(black_nm, "black_nm", 0)
    frac = _num(black_fraction, "black_fraction", 0, 1, hi_open=True)
    wob = _num(wobble, "wobble", 0, 0.2)
    y, x = _grid((h, w))
    u = x / max(w - 1, 1)
    wave = np.sin(2 * np.pi * (1.3 * u + 0.1)) + 0.45 * np.sin(2 * np.pi * (3.1 * u + 0.6))
    yb = (frac + 0.5 * wob * wave) * (h - 1)  # wavy boundary row of the black film, per column
    s = np.clip((y - yb) / np.maximum(h - 1 - yb, 1), 0, None)
    s = s * (1 + wob * (wave + 0.6 * np.sin(2 * np.pi * (2.2 * u + 1.7 * s))))
    t = top + (bottom - top) * (0.5 * s + 0.5 * s**2)
    return np.where(y < yb, black, t)


def scratch(
    t: np.ndarray, *, start_xy, end_xy, width_px: float, depth_to_nm: float = 0.0
) -> np.ndarray:
    """A copy of ``t`` (H, W) nm with a straight scratch down to ``depth_to_nm``.

    Pixels whose centre lies within ``width_px / 2`` of the segment from
    ``start_xy`` to ``end_xy`` ((x, y) in px) are set to ``depth_to_nm``.
    """
    t = np.array(t, dtype=np.float64)
    if t.ndim != 2:
        raise OptionError(f"expected a 2-D thickness field, got shape {t.shape}", where="t")
    (x0, y0), (x1, y1) = _centre(t.shape, start_xy, "start_xy"), _centre(t.shape, end_xy, "end_xy")
    half = _num(width_px, "width_px", 0) / 2
    depth = _num(depth_to_nm, "depth_to_nm", 0)
    y, x = _grid(t.shape)
    dx, dy = x1 - x0, y1 - y0
    frac = np.clip(((x - x0) * dx + (y - y0) * dy) / max(dx * dx + dy * dy, 1e-12), 0, 1)
    dist = np.hypot(x - x0 - frac * dx, y - y0 - frac * dy)
    t[dist <= half] = depth
    return t


def disc_mask(shape, *, centre=None, radius: float) -> np.ndarray:
    """Bool (H, W): pixels whose centre is within ``radius`` px of ``centre`` (x, y) (a wafer)."""
    shape = _shape(shape)
    r = _num(radius, "radius", 0)
    cx, cy = _centre(shape, centre)
    y, x = _grid(shape)
    return (x - cx) ** 2 + (y - cy) ** 2 <= r * r


def frame_mask(shape, *, margin_px: int) -> np.ndarray:
    """Bool (H, W): True inside a frame ``margin_px`` wide on every side (film in a frame)."""
    h, w = _shape(shape)
    m = int(_num(margin_px, "margin_px", 0, (min(h, w) - 1) / 2))
    mask = np.zeros((h, w), dtype=bool)
    mask[m : h - m, m : w - m] = True
    return mask


def read_thickness(path: str | Path) -> np.ndarray:
    """Read a 2-D float TIFF of thickness in nm (NaN = no film) as float64 (H, W)."""
    where = str(path)
    try:
        data = tifffile.imread(where)
    except FileNotFoundError:
        raise InputFileError("thickness TIFF not found", where=where) from None
    except Exception as exc:
        raise InputFileError(f"cannot read as TIFF ({type(exc).__name__})", where=where) from None
    data = np.squeeze(data)
    if data.ndim != 2 or not np.issubdtype(data.dtype, np.floating):
        raise InputFileError(
            f"expected a 2-D float image in nm, got {data.dtype} of shape {data.shape}", where=where
        )
    return data.astype(np.float64)


# ------------------------------------------------------------------------ photos


@dataclass(frozen=True, eq=False)
class SimulatedPhoto:
    """A rendered photo with its ground truth.

    Attributes
    ----------
    image : ndarray of shape (H, W, 3)
        RGB: uint8 (``srgb8``), uint16 (``srgb16``) or float32 linear (``linear``).
    thickness_nm : ndarray of shape (H, W)
        True film thickness (nm), NaN outside the film.
    film_mask : ndarray of bool, shape (H, W)
        Where the film is.
    exposure : float
        Linear multiplier used (a perfect white at the image centre = ``exposure``).
    settings : dict
        JSON-ready record of every setting used.
    jpeg_bytes : bytes or None
        The JPEG stream ``image`` was decoded from, when compressed.
    """

    image: np.ndarray
    thickness_nm: np.ndarray
    film_mask: np.ndarray
    exposure: float
    settings: dict
    jpeg_bytes: bytes | None = field(default=None, repr=False)


def _film_colours(t_film, stack, renderer, angle_deg, numerical_aperture, step_nm):
    """Linear RGB (P, 3) of film pixels via a fine thickness grid; also the grid range (nm)."""
    lo = np.floor(t_film.min() / step_nm) * step_nm
    n = max(int(np.ceil((t_film.max() - lo) / step_nm - 1e-9)) + 1, 2)
    grid = lo + step_nm * np.arange(n)
    rgb = np.empty((n, 3))
    for i in range(0, n, _CHUNK):
        R = reflectance(
            stack,
            thickness_nm=grid[i : i + _CHUNK],
            wavelength_nm=GRID_NM,
            angle_deg=angle_deg,
            numerical_aperture=numerical_aperture,
        )
        rgb[i : i + _CHUNK] = renderer.rgb(R)
    out = np.empty((t_film.size, 3))
    for c in range(3):
        out[:, c] = np.interp(t_film, grid, rgb[:, c])
    return out, (float(grid[0]), float(grid[-1]))


def _gain(shape, vignetting: float, lamp_gradient: float) -> np.ndarray:
    """Illumination × lens fall-off (H, W): cos⁴-like, 1 at the centre, 1 − v at the corners."""
    h, w = shape
    y, x = _grid(shape)
    xc, yc = (w - 1) / 2, (h - 1) / 2
    r2 = ((x - xc) ** 2 + (y - yc) ** 2) / max(xc * xc + yc * yc, 1e-12)
    tan2 = (1 - vignetting) ** -0.5 - 1  # tan² of the corner's field angle
    lamp = 1 + lamp_gradient * (x / max(w - 1, 1) - 0.5)
    return (1 / (1 + r2 * tan2) ** 2) * lamp


def render_photo(
    thickness_nm,
    *,
    stack: Stack,
    light,
    sensor="cie1931",
    angle_deg: float = 0.0,
    numerical_aperture: float = 0.0,
    film_mask=None,
    background_reflectance: float = 0.0,
    exposure: float | str = "auto",
    exposure_factor: float = 1.0,
    vignetting: float = 0.3,
    lamp_gradient: float = 0.1,
    blur_px: float = 1.0,
    noise: float = 0.01,
    jpeg_quality: int | None = None,
    white_balance_error=(1.0, 1.0, 1.0),
    seed: int = 0,
    output: str = "srgb8",
    step_nm: float = 0.25,
    camera_to_srgb: str = "none",
) -> SimulatedPhoto:
    """Render a photo of a film with thickness map ``thickness_nm``.

    Parameters
    ----------
    thickness_nm : ndarray of shape (H, W), or str / Path of a float TIFF
        Film thickness (nm), >= 0 on the film; NaN marks no film.
    stack : Stack
        The film stack (its film thickness is taken from the map).
    light, sensor : str, Light or Detector
        Illuminant and detector (see :mod:`fringemap.colour.spectra`).
    angle_deg, numerical_aperture : float
        Viewing angle (degrees from the normal) and lens aperture.
    film_mask : ndarray of bool (H, W), optional
        Where the film is (default: wherever the thickness is finite).
    background_reflectance : float
        Neutral reflectance (0-1) outside the film; 0 = black.
    exposure : float or "auto"
        Linear multiplier of a perfect white; "auto" puts the 99.5th
        percentile of the film's brightest channel at 0.85 of full scale.
    exposure_factor : float
        Multiplies the exposure (e.g. 0.5-3 for an unknown exposure).
    vignetting : float
        Fall-off at the image corners, 0 <= v < 1 (cos⁴-like, 1 at the centre).
    lamp_gradient : float
        Linear illumination ramp across x, ±lamp_gradient/2 at the sides.
    blur_px : float
        Gaussian lens blur, sigma in px (0 = none).
    noise : float
        Gaussian noise std as a fraction of full scale, added to the encoded
        values for ``srgb8`` / ``srgb16`` and to linear values for ``linear``.
    jpeg_quality : int, optional
        If given (1-100, ``srgb8`` only), JPEG-compress and decode the image.
    white_balance_error : (float, float, float)
        Per-channel multipliers of a mis-set white balance.
    seed : int
        Seed of the noise.
    output : {"srgb8", "srgb16", "linear"}
        8- or 16-bit sRGB-encoded, or float32 linear (clipped to 0-1).
    camera_to_srgb : {"none", "chart"}
        For a camera sensor: ``"none"`` writes white-balanced camera RGB as if it
        had sRGB primaries (an uncalibrated pipeline); ``"chart"`` first applies the
        3×3 matrix that best maps the camera's RGB of the 24 patches of the
        standard colour chart to their linear sRGB under this light (least squares,
        white kept at 1), as a camera's own JPEG engine does.
    step_nm : float
        Thickness step (nm) of the colour grid that pixels are interpolated on.

    Returns
    -------
    SimulatedPhoto
    """
    if isinstance(thickness_nm, str | Path):
        thickness_nm = read_thickness(thickness_nm)
    t = np.asarray(thickness_nm, dtype=np.float64)
    if t.ndim != 2 or t.size == 0:
        raise OptionError(
            f"expected a 2-D field (H, W) in nm, got shape {t.shape}", where="thickness_nm"
        )
    if not isinstance(stack, Stack):
        raise OptionError(f"expected a Stack, got {type(stack).__name__}", where="stack")
    mask = np.isfinite(t) if film_mask is None else np.asarray(film_mask)
    if mask.shape != t.shape or mask.dtype != bool:
        raise OptionError(
            f"expected a bool mask of shape {t.shape}, got {mask.dtype} {mask.shape}",
            where="film_mask",
        )
    if not mask.any():
        raise OptionError("expected at least one film pixel, got none", where="film_mask")
    t_film = t[mask]
    if not np.all(np.isfinite(t_film)) or t_film.min() < 0:
        raise OptionError(
            "expected finite thicknesses >= 0 nm on the film, got NaN or < 0", where="thickness_nm"
        )
    if output not in OUTPUTS:
        raise OptionError(f"expected one of {', '.join(OUTPUTS)}, got {output!r}", where="output")
    if jpeg_quality is not None:
        if output != "srgb8":
            raise OptionError(f"JPEG needs output 'srgb8', got {output!r}", where="jpeg_quality")
        jpeg_quality = int(_num(jpeg_quality, "jpeg_quality", 1, 100))
    wb = np.asarray(white_balance_error, dtype=np.float64)
    if wb.shape != (3,) or not np.all(np.isfinite(wb)) or np.any(wb <= 0):
        raise OptionError(
            f"expected three numbers > 0, got {white_balance_error!r}", where="white_balance_error"
        )
    bg = _num(background_reflectance, "background_reflectance", 0, 1)
    vig = _num(vignetting, "vignetting", 0, 1, hi_open=True)
    lamp = _num(lamp_gradient, "lamp_gradient", 0, 1.9)
    blur = _num(blur_px, "blur_px", 0, 1000)
    sigma_noise = _num(noise, "noise", 0, 1)
    factor = _num(exposure_factor, "exposure_factor", 0, 1e6)
    step = _num(step_nm, "step_nm", 1e-3, 50)
    light = parse_light(light, where="light")
    detector = parse_detector(sensor, where="sensor")
    renderer = Renderer(light, detector)

    colours, grid_range = _film_colours(
        t_film, stack, renderer, angle_deg, numerical_aperture, step
    )
    h, w = t.shape
    lin = np.full((h, w, 3), bg, dtype=np.float64)
    if camera_to_srgb not in ("none", "chart"):
        raise OptionError(
            f"expected 'none' or 'chart', got {camera_to_srgb!r}", where="camera_to_srgb"
        )
    if camera_to_srgb == "chart" and detector.kind == "camera":
        colours = colours @ _chart_matrix(renderer).T
    lin[mask] = colours
    lin *= wb
    lin *= _gain((h, w), vig, lamp)[..., None]
    if exposure == "auto":
        p = float(np.percentile(lin[mask].max(axis=1), 99.5))
        base = 0.85 / p if p > 0 else 1.0
    else:
        base = _num(exposure, "exposure", 0, 1e6)
    used = base * factor
    img = (lin * used).astype(np.float32)
    if blur > 0:
        img = cv2.GaussianBlur(img, (0, 0), sigmaX=blur, sigmaY=blur, borderType=cv2.BORDER_REFLECT)
    rng = np.random.default_rng(seed)
    img = np.clip(img, 0, 1)
    if output != "linear":
        img = srgb_encode(img)
    if sigma_noise > 0:
        img = np.clip(img + rng.normal(0, sigma_noise, img.shape).astype(np.float32), 0, 1)
    jpeg = None
    if output == "srgb8":
        image = np.round(img * 255).astype(np.uint8)
        if jpeg_quality is not None:
            ok, buf = cv2.imencode(
                ".jpg",
                cv2.cvtColor(image, cv2.COLOR_RGB2BGR),
                [cv2.IMWRITE_JPEG_QUALITY, jpeg_quality],
            )
            if not ok:  # pragma: no cover - OpenCV always encodes uint8 RGB
                raise OutputError("JPEG encoding failed", where="jpeg_quality")
            jpeg = buf.tobytes()
            image = cv2.cvtColor(cv2.imdecode(buf, cv2.IMREAD_COLOR), cv2.COLOR_BGR2RGB)
    elif output == "srgb16":
        image = np.round(img * 65535).astype(np.uint16)
    else:
        image = img.astype(np.float32)

    camera = detector.kind == "camera"
    settings = {
        "fringemap_version": __version__,
        "shape_px": [h, w],
        "stack": stack.describe(),
        "light": {"name": light.name, "description": light.description},
        "sensor": {"name": detector.name, "kind": detector.kind},
        "colour_space": renderer.space,
        "encoding": (
            "sRGB transfer on white-balanced camera RGB taken as sRGB primaries "
            "(uncalibrated camera)"
            if camera
            else "sRGB transfer on white-balanced linear sRGB"
        ),
        "angle_deg": float(angle_deg),
        "numerical_aperture": float(numerical_aperture),
        "film_pixels": int(mask.sum()),
        "film_thickness_nm": [float(t_film.min()), float(t_film.max())],
        "colour_grid_nm": {"range": list(grid_range), "step": step},
        "background_reflectance": bg,
        "exposure_mode": "auto" if exposure == "auto" else "fixed",
        "exposure_factor": factor,
        "exposure": used,
        "vignetting": vig,
        "lamp_gradient": lamp,
        "blur_px": blur,
        "noise": sigma_noise,
        "noise_domain": "linear" if output == "linear" else "encoded",
        "jpeg_quality": jpeg_quality,
        "white_balance_error": [float(v) for v in wb],
        "seed": int(seed),
        "output": output,
    }
    truth = np.where(mask, t, np.nan)
    return SimulatedPhoto(
        image=image,
        thickness_nm=truth,
        film_mask=mask.copy(),
        exposure=used,
        settings=settings,
        jpeg_bytes=jpeg,
    )


def _chart_matrix(renderer: Renderer) -> np.ndarray:
    """3×3 camera RGB → linear sRGB fitted on the 24-patch chart, white row-normalised."""
    import colour

    from .colour.spectra import GRID_NM

    sds = colour.SDS_COLOURCHECKERS["BabelColor Average"]
    refl = np.stack(
        [
            np.interp(GRID_NM, np.asarray(sd.wavelengths), np.asarray(sd.values))
            for sd in sds.values()
        ]
    )
    cam = renderer.rgb(refl)
    srgb = renderer.srgb_linear(refl)
    m, *_ = np.linalg.lstsq(cam, srgb, rcond=None)
    m = m.T
    return m / m.sum(axis=1, keepdims=True)  # camera white (1, 1, 1) stays sRGB white


# ------------------------------------------------------------------------ writing


def _write(path: Path, data: bytes) -> Path:
    from .io.write import atomic_path  # late: keeps simulate importable on its own

    with atomic_path(path) as tmp:
        tmp.write_bytes(data)
    return path


def _tiff_bytes(array: np.ndarray, **kwargs) -> bytes:
    buf = io.BytesIO()
    tifffile.imwrite(buf, array, compression="zlib", compressionargs={"level": 9}, **kwargs)
    return buf.getvalue()


def write_simulated(sim: SimulatedPhoto, folder, stem: str, *, fmt: str = "png") -> dict:
    """Write ``<stem>.<fmt>``, ``<stem>.truth.tif`` (float32 nm, NaN off film) and ``<stem>.json``.

    Parameters
    ----------
    sim : SimulatedPhoto
        The photo.
    folder : str or Path
        Existing output folder.
    stem : str
        File name without extension.
    fmt : {"png", "jpg", "tif"}
        Image format: PNG (8/16-bit), JPEG (8-bit; the sim's own JPEG stream
        when it has one, else quality 95) or TIFF (any output, zlib).

    Returns
    -------
    dict
        Paths written: ``image``, ``truth``, ``settings``.
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise OutputError("output folder does not exist", where=str(folder))
    img = sim.image
    if fmt == "png" or fmt == "jpg":
        if img.dtype == np.float32 or (fmt == "jpg" and img.dtype != np.uint8):
            raise OptionError(
                f"{fmt} needs an 8-bit{'' if fmt == 'jpg' else ' or 16-bit'} "
                f"image, got {img.dtype}",
                where="fmt",
            )
        if fmt == "jpg" and sim.jpeg_bytes is not None:
            data = sim.jpeg_bytes
        else:
            params = [cv2.IMWRITE_JPEG_QUALITY, 95] if fmt == "jpg" else []
            ok, buf = cv2.imencode(f".{fmt}", cv2.cvtColor(img, cv2.COLOR_RGB2BGR), params)
            if not ok:  # pragma: no cover
                raise OutputError(f"{fmt} encoding failed", where=str(folder / stem))
            data = buf.tobytes()
    elif fmt == "tif":
        data = _tiff_bytes(img, photometric="rgb")
    else:
        raise OptionError(f"expected fmt 'png', 'jpg' or 'tif', got {fmt!r}", where="fmt")
    out = {"image": _write(folder / f"{stem}.{fmt}", data)}
    desc = json.dumps({"quantity": "film thickness", "unit": "nm", "off_film": "NaN"})
    out["truth"] = _write(
        folder / f"{stem}.truth.tif",
        _tiff_bytes(sim.thickness_nm.astype(np.float32), description=desc),
    )
    out["settings"] = _write(
        folder / f"{stem}.json", (json.dumps(sim.settings, indent=2) + "\n").encode()
    )
    return out


# --------------------------------------------------------------------- scenarios

_DEMO = {"noise": 0.01, "jpeg_quality": 90, "blur_px": 1.0}


def _lattice(t: np.ndarray) -> np.ndarray:
    """Round to 1/32 nm so the truth TIFFs compress (0.016 nm is far below any measurement)."""
    return np.round(t * 32) / 32


def soap_frame(*, seed: int = 0):
    """A soap film draining in a wire frame under a warm-white LED, 1000 × 900 px."""
    shape = (1000, 900)
    t = _lattice(draining_film(shape, top_nm=90, bottom_nm=1100, black_fraction=0.16))
    stack = Stack.from_names(film="db:main/H2O/Hale", substrate="air")
    sim = render_photo(
        t,
        stack=stack,
        light="LED-B1",
        film_mask=frame_mask(shape, margin_px=50),
        vignetting=0.25,
        lamp_gradient=0.12,
        seed=seed,
        **_DEMO,
    )
    recipe = {
        "stack": {"film": "soap", "substrate": "air"},
        "light": {"source": "LED-B1"},
        "camera": {"sensor": "cie1931"},
        "search": {"range_nm": [0.0, 1300.0], "step_nm": 1.0},
        "measure": {"roi": "rect:50,50,850,950", "anchors": ["450,100=25"]},
        "report": {"profiles": ["450,60:450,940"]},
    }
    note = (
        "Soap film draining in a wire frame under a warm-white LED (CIE LED-B1), black "
        "background: 25 nm black film across the top, then 90 -> 1100 nm downwards; rendered "
        "with pure-water data (db:main/H2O/Hale), about 0.005 below the recipe's built-in "
        "soap index, so expect thicknesses ~0.4 % low."
    )
    return sim, recipe, note


def oxide_wafer(*, seed: int = 0):
    """Thermal oxide on a silicon wafer under F11 seen by camera set A, 1000 × 1000 px."""
    shape = (1000, 1000)
    t = _lattice(bowl(shape, centre_nm=480, edge_nm=540, radius_px=470))
    stack = Stack.from_names(film="db:main/SiO2/Franta", substrate="db:main/Si/Aspnes")
    sim = render_photo(
        t,
        stack=stack,
        light="F11",
        sensor="camera-a",
        film_mask=disc_mask(shape, radius=470),
        vignetting=0.3,
        lamp_gradient=0.08,
        seed=seed,
        **_DEMO,
    )
    recipe = {
        "stack": {"film": "sio2", "substrate": "si"},
        "light": {"source": "F11"},
        "camera": {"sensor": "camera-a"},
        "search": {"range_nm": [300.0, 800.0], "step_nm": 0.5},
        "measure": {"roi": "circle:499.5,499.5,470"},
        "report": {"scale_px_per_mm": 9.4, "edge_exclusion_mm": 3.0, "sites": 9},
    }
    note = (
        "Thermal oxide on a 100 mm silicon wafer (disc on black) under tri-band fluorescent "
        "F11, camera set A (uncalibrated: camera RGB encoded as sRGB), radial bowl 480 nm "
        "centre -> 540 nm edge; rendered with SiO2 db:main/SiO2/Franta and Si "
        "db:main/Si/Aspnes, the recipe uses the built-ins."
    )
    return sim, recipe, note


_LACQUER = "cauchy:1.74,0.018"  # titania-silica hybrid sol-gel hard coat, n(550 nm) ~ 1.80


def coated_slide(*, seed: int = 0):
    """A sol-gel hard coat on a 1 mm glass slide, Gaussian bump and a scratch, 800 × 1200 px."""
    shape = (800, 1200)
    t = bump(shape, base_nm=350, height_nm=300, sigma_px=130, centre=(640, 390))
    t = _lattice(scratch(t, start_xy=(150, 260), end_xy=(1050, 560), width_px=6))
    mask = np.zeros(shape, dtype=bool)
    mask[150:650] = True  # the slide crosses the frame; dark felt above and below
    stack = Stack.from_names(
        film=_LACQUER, substrate="db:glass/soda-lime/Rubin-clear", substrate_thickness_nm=1e6
    )
    sim = render_photo(
        t,
        stack=stack,
        light="D50",
        film_mask=mask,
        background_reflectance=0.005,
        vignetting=0.2,
        lamp_gradient=0.1,
        white_balance_error=(1.04, 1, 0.97),
        seed=seed,
        **_DEMO,
    )
    recipe = {
        "stack": {"film": _LACQUER, "substrate": "crown-glass", "substrate_thickness_nm": 1e6},
        "light": {"source": "D50"},
        "camera": {"sensor": "cie1931"},
        "search": {"range_nm": [0.0, 1200.0], "step_nm": 1.0},
        "measure": {"roi": "rect:0,160,1200,640"},
        "report": {"profiles": ["150,260:1050,560", "40,390:1160,390"]},
    }
    note = (
        "Titania-silica sol-gel hard coat (Cauchy n ~ 1.80) on a 1 mm glass slide over dark "
        "felt under D50: 350 nm with a 300 nm Gaussian bump and a scratch to bare glass; "
        "rendered on soda-lime data (Rubin) while the recipe says crown glass, and with a "
        "slight white-balance error (1.04, 1, 0.97)."
    )
    return sim, recipe, note


SCENARIOS: dict[str, Callable] = {
    "soap-frame": soap_frame,
    "oxide-wafer": oxide_wafer,
    "coated-slide": coated_slide,
}


def write_demo_images(folder, *, names=None) -> list[Path]:
    """Render every scenario (or those in ``names``) into ``folder`` (created if needed).

    Writes ``<name>.jpg``, ``<name>.truth.tif``, ``<name>.json`` (render
    settings), ``<name>.recipe.toml`` and ``<name>.txt`` (a one-line note). The
    scenarios' thicknesses lie on a 1/32 nm lattice to keep the truth files small.
    Returns the paths written.
    """
    from .recipe import Recipe

    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"cannot create folder ({exc.strerror})", where=str(folder)) from None
    paths = []
    for name, make in SCENARIOS.items():
        if names is not None and name not in names:
            continue
        sim, recipe, note = make()
        planned = [
            folder / f"{name}{end}"
            for end in (".jpg", ".truth.tif", ".json", ".recipe.toml", ".txt")
        ]
        before = {p: _identity(p) for p in planned}
        try:
            paths += list(write_simulated(sim, folder, name, fmt="jpg").values())
            paths.append(
                _write(folder / f"{name}.recipe.toml", Recipe.from_dict(recipe).to_toml().encode())
            )
            paths.append(_write(folder / f"{name}.txt", (note + "\n").encode()))
        except BaseException:
            # a scenario is written whole or not at all: remove the files this run wrote
            for p in planned:
                if _identity(p) is not None and _identity(p) != before[p]:
                    p.unlink(missing_ok=True)
            raise
    return paths


def _identity(path: Path) -> tuple[int, int, int] | None:
    """(device, inode, mtime) of a file, None when absent: tells a file just written."""
    try:
        st = path.stat()
    except OSError:
        return None
    return (st.st_dev, st.st_ino, st.st_mtime_ns)
