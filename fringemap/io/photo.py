"""Reading photographs into linear-light RGB arrays.

This is the first stage of the pipeline: a photo file (PNG, JPEG, TIFF or a
camera raw file) becomes a :class:`Photo`, whose ``linear`` array holds linear
light in channel-last ``(H, W, 3)`` float32 form with 1 meaning the full scale
of the file's encoding (or of the sensor, for raw files).

The reader is deliberately strict and deliberately talkative: every file it
cannot use gives one :class:`~fringemap.errors.InputFileError` whose one-line
message says what is wrong with the file and what to do about it. The file's
format is recognised from its first bytes, not from its name, so a PNG saved
with a ``.jpg`` name is still read as a PNG.

Image size is checked from the file header before any pixel is decoded, so a
small file that claims to hold an enormous image is refused cheaply.
"""

from __future__ import annotations

import datetime as _dt
import io
import logging
import math
import os
import stat
import struct
import warnings
import zlib
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import cv2
import numpy as np
import tifffile
from PIL import Image, JpegImagePlugin

from fringemap.colour.transfer import srgb_decode
from fringemap.errors import FringemapError, InputFileError, OptionError

__all__ = [
    "Photo",
    "read_photo",
    "photo_from_array",
    "RAW_EXTENSIONS",
    "SATURATION_LEVEL",
    "MIN_SIDE",
]

#: Fraction of full scale at or above which an encoded value counts as clipped.
SATURATION_LEVEL = 0.985

#: Smallest accepted width and height, pixels.
MIN_SIDE = 8

#: File name endings that are handed to the raw decoder.
RAW_EXTENSIONS = frozenset({".dng", ".cr2", ".cr3", ".nef", ".arw", ".raf", ".orf", ".rw2"})

_LINEARISE_CHOICES = ("auto", "srgb", "linear")

#: Settings for the raw decoder: linear (gamma 1), no automatic brightening,
#: 16-bit output, the camera's as-shot white balance, the file's own white
#: level, sRGB primaries.
RAW_POSTPROCESS_SETTINGS: dict[str, Any] = {
    "gamma": (1, 1),
    "no_auto_bright": True,
    "output_bps": 16,
    "use_camera_wb": True,
    "adjust_maximum_thr": 0,
}

# LibRaw's "flip" value -> the equivalent EXIF orientation tag.
_LIBRAW_FLIP_TO_EXIF = {0: 1, 3: 3, 5: 8, 6: 6}

_SUPPORTED_HINT = "fringemap reads PNG, JPEG, TIFF and camera raw files"


# --------------------------------------------------------------------------
# The Photo record
# --------------------------------------------------------------------------


@dataclass(frozen=True, eq=False, init=False)
class Photo:
    """A photograph decoded to linear light.

    Attributes
    ----------
    linear : numpy.ndarray
        Linear-light RGB, float32, shape ``(H, W, 3)``, channel last. Nominally
        0-1, where 1 is the full scale of the file's encoding (or the raw white
        level); float TIFF files may hold values outside that range. Photos
        read from 8- and 16-bit files keep their stored values (``codes``) and
        decode this array on first use (then keep it).
    path : str or None
        The file the photo was read from, or None for an in-memory array.
    bit_depth : int
        Bits per sample of the stored values: 8, 16, or 32 for floating-point
        data.
    encoding : str
        ``"srgb"`` when the stored values were sRGB gamma-encoded and have been
        decoded, ``"linear"`` when they were taken as linear light already
        (float TIFF, raw files, or ``linearise="linear"``).
    saturated : numpy.ndarray
        bool, shape ``(H, W)``: True where any channel of the *stored* value is
        at or above :data:`SATURATION_LEVEL` (98.5 %) of full scale. Aligned
        with ``linear`` (the orientation has been applied to both).
    orientation_applied : int
        The EXIF orientation (1-8) that was applied to bring the picture
        upright; 1 means the pixels were used as stored.
    datetime_original : str or None
        EXIF DateTimeOriginal (``"YYYY:MM:DD HH:MM:SS"``) if the file has one.
    camera : str or None
        Camera make and model from EXIF, if present.
    metadata : dict
        Further facts about the file: ``"format"`` (``"png"``, ``"jpeg"``,
        ``"tiff"``, ``"raw"`` or ``"array"``), ``"file_size"`` (bytes),
        ``"icc_profile"`` (bool: an embedded colour profile was present, and
        ignored), exposure settings when known (``"exposure_time_s"``,
        ``"f_number"``, ``"iso"``), and for raw files the decoder's white
        balance and levels (``"camera_white_balance"``, ...).
    codes : numpy.ndarray or None
        The stored values, uint8 or uint16, shape ``(H, W, 3)``, upright, when
        the photo came from an 8- or 16-bit file; ``linear == code_lut[codes]``.
        Large photos are measured from these directly (a quarter or half of the
        memory of ``linear``).
    code_lut : numpy.ndarray or None
        float32, one linear value per stored code (length 2**bit_depth).
    """

    _linear: np.ndarray | None = field(repr=False)
    path: str | None
    bit_depth: int
    encoding: str
    saturated: np.ndarray = field(repr=False)
    orientation_applied: int = 1
    datetime_original: str | None = None
    camera: str | None = None
    metadata: dict = field(default_factory=dict, repr=False)
    codes: np.ndarray | None = field(default=None, repr=False)
    code_lut: np.ndarray | None = field(default=None, repr=False)

    def __init__(
        self,
        linear: np.ndarray | None = None,
        path: str | None = None,
        bit_depth: int = 8,
        encoding: str = "srgb",
        saturated: np.ndarray | None = None,
        orientation_applied: int = 1,
        datetime_original: str | None = None,
        camera: str | None = None,
        metadata: dict | None = None,
        *,
        codes: np.ndarray | None = None,
        code_lut: np.ndarray | None = None,
    ) -> None:
        values = dict(
            _linear=linear,
            path=path,
            bit_depth=bit_depth,
            encoding=encoding,
            saturated=saturated,
            orientation_applied=orientation_applied,
            datetime_original=datetime_original,
            camera=camera,
            metadata={} if metadata is None else metadata,
            codes=codes,
            code_lut=code_lut,
        )
        for name, value in values.items():
            object.__setattr__(self, name, value)
        self._check()

    @property
    def linear(self) -> np.ndarray:
        """Linear-light RGB, float32 (H, W, 3) (see the class docstring)."""
        if self._linear is None:
            if self.codes.dtype == np.uint8:
                lin = cv2.LUT(self.codes, self.code_lut)  # several times faster than indexing
            else:
                lin = self.code_lut[self.codes]
            object.__setattr__(self, "_linear", lin)
        return self._linear

    def _check(self) -> None:
        if self._linear is None:
            codes, lut = self.codes, self.code_lut
            if (
                not isinstance(codes, np.ndarray)
                or codes.dtype not in (np.uint8, np.uint16)
                or codes.ndim != 3
                or codes.shape[2] != 3
                or not codes.flags.c_contiguous
            ):
                raise OptionError(
                    "Photo.codes must be a C-contiguous uint8 or uint16 (H, W, 3) array, got "
                    f"{getattr(codes, 'dtype', type(codes).__name__)} {np.shape(codes)}",
                    where="codes",
                )
            full = int(np.iinfo(codes.dtype).max) + 1
            if not isinstance(lut, np.ndarray) or lut.dtype != np.float32 or lut.shape != (full,):
                raise OptionError(
                    f"Photo.code_lut must be float32 of shape ({full},), got {np.shape(lut)}",
                    where="code_lut",
                )
            shape = codes.shape
        else:
            lin = self._linear
            if not isinstance(lin, np.ndarray) or lin.ndim != 3 or lin.shape[2] != 3:
                raise OptionError(
                    f"Photo.linear must be an (H, W, 3) array, got shape {np.shape(lin)}",
                    where="linear",
                )
            if lin.dtype != np.float32:
                raise OptionError(
                    f"Photo.linear must be float32, got {lin.dtype}; convert with "
                    ".astype(np.float32)",
                    where="linear",
                )
            shape = lin.shape
        sat = self.saturated
        if not isinstance(sat, np.ndarray) or sat.dtype != np.bool_ or sat.shape != shape[:2]:
            raise OptionError(
                f"Photo.saturated must be a bool array of shape {shape[:2]}, "
                f"got {getattr(sat, 'dtype', type(sat).__name__)} {np.shape(sat)}",
                where="saturated",
            )
        if self.encoding not in ("srgb", "linear"):
            raise OptionError(
                f"Photo.encoding must be 'srgb' or 'linear', got {self.encoding!r}",
                where="encoding",
            )

    @property
    def shape(self) -> tuple[int, int]:
        """Height and width of the photo, pixels: ``(H, W)``."""
        stored = self.codes if self._linear is None else self._linear
        return (int(stored.shape[0]), int(stored.shape[1]))


# --------------------------------------------------------------------------
# Small helpers
# --------------------------------------------------------------------------


def _one_line(text: object) -> str:
    """Collapse any whitespace run (including newlines) to one space."""
    return " ".join(str(text).split())


def _exc_text(exc: BaseException) -> str:
    """A library exception as short one-line text (with its type when the text is terse)."""
    text = _one_line(exc)
    if len(text) < 8:
        text = f"{type(exc).__name__} {text}".strip()
    return text


@contextmanager
def _collect_log(name: str) -> Iterator[list[str]]:
    """Collect a library logger's warnings for the duration of a block.

    Keeps third-party log messages (tifffile logs damaged-file warnings) off
    the user's terminal; the messages are returned to the caller instead.
    """
    logger = logging.getLogger(name)
    notes: list[str] = []

    class _Keep(logging.Handler):
        def emit(self, record: logging.LogRecord) -> None:
            notes.append(_one_line(record.getMessage()))

    handler = _Keep(level=logging.WARNING)
    propagate = logger.propagate
    logger.addHandler(handler)
    logger.propagate = False
    try:
        yield notes
    finally:
        logger.removeHandler(handler)
        logger.propagate = propagate


def _fail(where: str, message: str) -> InputFileError:
    return InputFileError(_one_line(message), where=where)


def _check_linearise(linearise: object) -> str:
    if linearise not in _LINEARISE_CHOICES:
        raise OptionError(
            f"linearise must be one of {', '.join(_LINEARISE_CHOICES)}, got {linearise!r}",
            where="linearise",
        )
    return str(linearise)


def _check_max_pixels(max_pixels: object) -> int:
    if isinstance(max_pixels, bool) or not isinstance(max_pixels, int | np.integer):
        raise OptionError(
            f"max_pixels must be a positive whole number, got {max_pixels!r}",
            where="max_pixels",
        )
    if max_pixels <= 0:
        raise OptionError(
            f"max_pixels must be a positive whole number, got {max_pixels}",
            where="max_pixels",
        )
    return int(max_pixels)


def _check_dimensions(where: str, width: int, height: int, max_pixels: int) -> None:
    """Refuse images that are too small or too large, from header values alone."""
    if width <= 0 or height <= 0:
        raise _fail(where, f"is corrupt: its header gives an image size of {width} x {height}")
    if width < MIN_SIDE or height < MIN_SIDE:
        raise _fail(
            where,
            f"is too small ({width} x {height} pixels); a photo of at least "
            f"{MIN_SIDE} x {MIN_SIDE} pixels is needed",
        )
    pixels = width * height
    if pixels > max_pixels:
        raise _fail(
            where,
            f"is too large to read safely ({width} x {height} = {pixels / 1e6:.0f} megapixels, "
            f"limit {max_pixels / 1e6:.0f}); crop or downscale it, or raise max_pixels",
        )


def _ints(values: Any) -> list[int]:
    return [int(v) for v in values]


def _as_text(value: Any) -> str | None:
    """EXIF text (str or bytes, possibly NUL padded) to a clean str, or None."""
    if value is None:
        return None
    if isinstance(value, bytes | bytearray):
        value = bytes(value).decode("utf-8", errors="replace")
    if isinstance(value, tuple | list):
        return None
    text = _one_line(str(value).replace("\x00", " "))
    return text or None


def _as_float(value: Any) -> float | None:
    """EXIF number (int, rational, or (num, den) pair) to float, or None."""
    try:
        if isinstance(value, tuple | list):
            if len(value) == 2:
                num, den = value
                return float(num) / float(den) if float(den) != 0 else None
            if len(value) >= 1:
                value = value[0]
        result = float(value)
    except (TypeError, ValueError, ZeroDivisionError):
        return None
    return result if math.isfinite(result) else None


def _camera_name(make: Any, model: Any) -> str | None:
    make_s, model_s = _as_text(make), _as_text(model)
    if make_s and model_s:
        if model_s.lower().startswith(make_s.lower()):
            return model_s
        return f"{make_s} {model_s}"
    return model_s or make_s


@dataclass
class _Tags:
    """What the reader keeps from a file's EXIF/TIFF tags."""

    orientation: int = 1
    datetime_original: str | None = None
    camera: str | None = None
    extra: dict = field(default_factory=dict)


def _tags_from_values(
    orientation: Any,
    make: Any,
    model: Any,
    exif: dict,
) -> _Tags:
    """Build :class:`_Tags` from raw tag values; ``exif`` maps tag names to values."""
    tags = _Tags()
    if orientation is not None:
        try:
            value = int(orientation[0] if isinstance(orientation, tuple | list) else orientation)
        except (TypeError, ValueError, IndexError):
            value = 0
        if 1 <= value <= 8:
            tags.orientation = value
        else:
            tags.extra["orientation_ignored"] = value
    tags.camera = _camera_name(make, model)
    tags.datetime_original = _as_text(exif.get("DateTimeOriginal"))
    offset = _as_text(exif.get("OffsetTimeOriginal"))
    if offset:
        tags.extra["offset_time_original"] = offset
    exposure = _as_float(exif.get("ExposureTime"))
    if exposure is not None and exposure > 0:
        tags.extra["exposure_time_s"] = exposure
    f_number = _as_float(exif.get("FNumber"))
    if f_number is not None and f_number > 0:
        tags.extra["f_number"] = f_number
    iso = _as_float(exif.get("ISOSpeedRatings"))
    if iso is not None and iso > 0:
        tags.extra["iso"] = iso
    return tags


# EXIF tag numbers (CIPA DC-008) used from PIL's numeric dictionaries.
_EXIF_NAMES = {
    0x9003: "DateTimeOriginal",
    0x9011: "OffsetTimeOriginal",
    0x829A: "ExposureTime",
    0x829D: "FNumber",
    0x8827: "ISOSpeedRatings",
}


def _tags_from_exif_bytes(data: bytes | None) -> _Tags:
    """Parse an EXIF block (TIFF structure, optionally with an ``Exif\\0\\0`` prefix).

    Damaged EXIF never stops a photo from being read: whatever cannot be
    parsed is left out and noted in ``extra["exif_problem"]``.
    """
    if not data:
        return _Tags()
    if data.startswith(b"Exif\x00\x00"):
        data = data[6:]
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            exif = Image.Exif()
            exif.load(data)
            ifd0 = dict(exif.items())
            sub = exif.get_ifd(0x8769)
        named = {name: sub.get(num) for num, name in _EXIF_NAMES.items() if num in sub}
        tags = _tags_from_values(ifd0.get(0x0112), ifd0.get(0x010F), ifd0.get(0x0110), named)
        if caught:
            tags.extra["exif_problem"] = _one_line(caught[0].message)
        return tags
    except Exception as exc:  # damaged EXIF: keep the pixels, drop the tags
        tags = _Tags()
        tags.extra["exif_problem"] = _one_line(f"{type(exc).__name__}: {exc}")
        return tags


def _orient(array: np.ndarray, orientation: int) -> np.ndarray:
    """Apply an EXIF orientation (1-8) to an array of shape ``(H, W, ...)``.

    The result is what a viewer that honours the tag displays: for tag 6
    (stored rotated 90 degrees anticlockwise) the array is turned 90 degrees
    clockwise, and so on.
    """
    if orientation == 2:
        out = array[:, ::-1]
    elif orientation == 3:
        out = array[::-1, ::-1]
    elif orientation == 4:
        out = array[::-1]
    elif orientation == 5:
        out = np.swapaxes(array, 0, 1)
    elif orientation == 6:
        out = np.rot90(array, k=-1)
    elif orientation == 7:
        out = np.swapaxes(array[::-1, ::-1], 0, 1)
    elif orientation == 8:
        out = np.rot90(array, k=1)
    else:
        return array
    return np.ascontiguousarray(out)


_LUT_CACHE: dict[int, np.ndarray] = {}


def _srgb_lut(full_scale: int) -> np.ndarray:
    """float32 table: integer code 0..full_scale -> linear light (sRGB decode)."""
    lut = _LUT_CACHE.get(full_scale)
    if lut is None:
        codes = np.arange(full_scale + 1, dtype=np.float64) / full_scale
        lut = srgb_decode(codes).astype(np.float32)
        lut.flags.writeable = False
        _LUT_CACHE[full_scale] = lut
    return lut


def _code_lut(dtype: np.dtype, use_srgb: bool) -> np.ndarray:
    """float32 table: stored integer code -> linear light (as :func:`_to_linear` computes)."""
    full = int(np.iinfo(dtype).max)
    if use_srgb:
        return _srgb_lut(full)
    return np.arange(full + 1, dtype=np.float32) / np.float32(full)


def _saturation_mask(rgb: np.ndarray) -> np.ndarray:
    """bool (H, W): any channel of the stored values >= SATURATION_LEVEL of full scale."""
    if rgb.dtype.kind == "u":
        full = np.iinfo(rgb.dtype).max
        threshold = math.ceil(SATURATION_LEVEL * full - 1e-9)
        if rgb.ndim == 3 and rgb.shape[-1] == 3 and rgb.dtype in (np.uint8, np.uint16):
            # OpenCV: "every channel below the threshold", negated (numpy's any() over a
            # 3-long last axis is several times slower on a 12-megapixel photo)
            below = cv2.inRange(np.ascontiguousarray(rgb), (0, 0, 0), (threshold - 1,) * 3)
            return below == 0
        return np.any(rgb >= threshold, axis=-1)
    return np.any(rgb >= SATURATION_LEVEL, axis=-1)


def _to_linear(rgb: np.ndarray, use_srgb: bool) -> np.ndarray:
    """Stored values (H, W, 3), uint8/uint16/float -> float32 linear light."""
    if rgb.dtype.kind == "u":
        full = int(np.iinfo(rgb.dtype).max)
        if use_srgb:
            if rgb.dtype == np.uint8:
                # OpenCV's table look-up: several times faster than fancy indexing
                return cv2.LUT(np.ascontiguousarray(rgb), _srgb_lut(full))
            return _srgb_lut(full)[rgb]
        return rgb.astype(np.float32) / np.float32(full)
    values = rgb.astype(np.float32, copy=False)
    if use_srgb:
        return srgb_decode(values).astype(np.float32, copy=False)
    return values


def _drop_alpha(where: str, pixels: np.ndarray, *, is_float: bool = False) -> np.ndarray:
    """(H, W, 4) -> (H, W, 3) when the alpha channel is fully opaque; error otherwise."""
    alpha = pixels[..., 3]
    opaque = 1.0 if is_float else np.iinfo(pixels.dtype).max
    if not np.all(alpha == opaque):
        count = int(np.count_nonzero(alpha != opaque))
        raise _fail(
            where,
            f"has {count} transparent or partly transparent pixels (alpha channel); "
            "save the photo without transparency",
        )
    return pixels[..., :3]


def _finish(
    where: str,
    rgb: np.ndarray,
    *,
    path: str | None,
    use_srgb: bool,
    tags: _Tags,
    metadata: dict,
    already_oriented: int | None = None,
) -> Photo:
    """Stored RGB (H, W, 3) -> Photo: checks, saturation, linearisation, orientation."""
    if rgb.dtype.kind == "f":
        if not np.all(np.isfinite(rgb)):
            count = int(np.count_nonzero(~np.isfinite(rgb)))
            raise _fail(
                where,
                f"holds {count} non-finite sample values (NaN or infinity); replace them with "
                "finite numbers in the file",
            )
        bit_depth = 32
    else:
        bit_depth = int(rgb.dtype.itemsize * 8)
    saturated = _saturation_mask(rgb)
    orientation = tags.orientation if already_oriented is None else already_oriented
    turn = already_oriented is None
    if rgb.dtype in (np.uint8, np.uint16):
        # integer files keep their stored values; linear light is decoded on first use
        linear = None
        codes = np.ascontiguousarray(_orient(rgb, orientation) if turn else rgb)
        lut = _code_lut(rgb.dtype, use_srgb)
    else:
        linear = _to_linear(rgb, use_srgb)
        linear = np.ascontiguousarray(_orient(linear, orientation) if turn else linear)
        linear = linear.astype(np.float32, copy=False)
        codes = lut = None
    if turn:
        saturated = _orient(saturated, orientation)
    meta = dict(metadata)
    meta.update(tags.extra)
    return Photo(
        linear=linear,
        codes=codes,
        code_lut=lut,
        path=path,
        bit_depth=bit_depth,
        encoding="srgb" if use_srgb else "linear",
        saturated=np.ascontiguousarray(saturated, dtype=np.bool_),
        orientation_applied=int(orientation),
        datetime_original=tags.datetime_original,
        camera=tags.camera,
        metadata=meta,
    )


# --------------------------------------------------------------------------
# Recognising the format
# --------------------------------------------------------------------------

_PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
_TIFF_MAGICS = (b"II*\x00", b"MM\x00*", b"II+\x00", b"MM\x00+")
_RAW_MAGICS = (b"IIRO", b"IIRS", b"MMOR", b"IIU\x00", b"FUJIFILMCCD-RAW")

# Formats recognised only to name them in the error message.
_OTHER_FORMATS: tuple[tuple[Callable[[bytes], bool], str], ...] = (
    (lambda h: h[:6] in (b"GIF87a", b"GIF89a"), "GIF"),
    (lambda h: h[:2] == b"BM", "BMP"),
    (lambda h: h[:4] == b"RIFF" and h[8:12] == b"WEBP", "WebP"),
    (lambda h: h[4:8] == b"ftyp" and h[8:12] in (b"avif", b"avis"), "AVIF"),
    (lambda h: h[4:8] == b"ftyp" and h[8:12] in (b"heic", b"heix", b"mif1", b"msf1"), "HEIF"),
    (lambda h: h[:12] == b"\x00\x00\x00\x0cjP  \r\n\x87\n", "JPEG 2000"),
    (lambda h: h[:2] == b"\xff\x0a" or h[:12] == b"\x00\x00\x00\x0cJXL \r\n\x87\n", "JPEG XL"),
    (lambda h: h[:4] == b"8BPS", "Photoshop"),
    (lambda h: h[:4] == b"v/1\x01", "OpenEXR"),
    (lambda h: h[:5] == b"%PDF-", "PDF"),
    (lambda h: h[:4] in (b"PK\x03\x04", b"PK\x05\x06"), "ZIP archive"),
)


def _sniff(head: bytes, suffix: str) -> str:
    """Return "png", "jpeg", "tiff", "raw", "text" or "unknown:<name>"."""
    if head.startswith(_PNG_SIGNATURE):
        return "png"
    if head.startswith(b"\xff\xd8\xff"):
        return "jpeg"
    if head[4:12] == b"ftypcrx ":  # Canon CR3 (ISO base media file)
        return "raw"
    if any(head.startswith(m) for m in _RAW_MAGICS):
        return "raw"
    if head[:4] in _TIFF_MAGICS:
        return "raw" if suffix in RAW_EXTENSIONS else "tiff"
    for test, name in _OTHER_FORMATS:
        if test(head):
            return f"unknown:{name}"
    if _looks_like_text(head):
        return "text"
    if suffix in RAW_EXTENSIONS:
        return "raw"  # many raw formats have no fixed signature: let the decoder decide
    return "unknown:"


def _looks_like_text(head: bytes) -> bool:
    if not head or b"\x00" in head:
        return False
    controls = sum(1 for b in head if b < 0x20 and b not in (0x09, 0x0A, 0x0C, 0x0D))
    return controls == 0


# --------------------------------------------------------------------------
# PNG
# --------------------------------------------------------------------------

_PNG_COLOUR_TYPES = {0: "greyscale", 2: "RGB", 3: "palette", 4: "greyscale+alpha", 6: "RGBA"}


def _png_header(where: str, data: bytes) -> tuple[int, int, int, int]:
    """Width, height, bit depth and colour type from the IHDR chunk."""
    if len(data) < 33:
        raise _fail(where, "is truncated (it ends inside the PNG header); copy the file again")
    length, ctype = struct.unpack(">I4s", data[8:16])
    if ctype != b"IHDR" or length != 13:
        raise _fail(where, "is corrupt (its PNG header chunk is missing); re-export the photo")
    if zlib.crc32(data[12:29]) != struct.unpack(">I", data[29:33])[0]:
        raise _fail(where, "is corrupt (checksum error in its PNG header); copy the file again")
    width, height, depth, colour = struct.unpack(">IIBB", data[16:26])
    return width, height, depth, colour


def _png_chunks(where: str, data: bytes) -> dict:
    """Walk all chunks up to IEND, checking lengths and checksums.

    Returns a dict with the raw eXIf payload (or None) and facts about
    colour management chunks.
    """
    view = memoryview(data)
    n = len(data)
    pos = 8
    found: dict[str, Any] = {"exif": None, "icc_profile": False, "idat": 0}
    while True:
        if pos + 8 > n:
            raise _fail(
                where,
                "is truncated (the PNG data ends before its end marker); copy the file again",
            )
        length, ctype = struct.unpack(">I4s", data[pos : pos + 8])
        if length > 0x7FFFFFFF:
            raise _fail(where, "is corrupt (a PNG chunk has an impossible length); re-export it")
        end = pos + 12 + length
        if end > n:
            raise _fail(
                where,
                "is truncated (the PNG data ends inside a chunk); copy the file again",
            )
        stored_crc = struct.unpack(">I", data[end - 4 : end])[0]
        if zlib.crc32(view[pos + 4 : end - 4]) != stored_crc:
            name = ctype.decode("latin-1")
            raise _fail(
                where,
                f"is corrupt (checksum error in its {name!r} chunk); copy the file again",
            )
        if ctype == b"IDAT":
            found["idat"] += 1
        elif ctype == b"eXIf" and found["exif"] is None:
            found["exif"] = bytes(view[pos + 8 : end - 4])
        elif ctype == b"iCCP":
            found["icc_profile"] = True
        elif ctype == b"IEND":
            break
        pos = end
    if found["idat"] == 0:
        raise _fail(where, "is corrupt (the PNG file has no image data); re-export it")
    return found


def _read_png(where: str, data: bytes, *, linearise: str, max_pixels: int, meta: dict) -> Photo:
    width, height, depth, colour = _png_header(where, data)
    _check_dimensions(where, width, height, max_pixels)
    if colour not in _PNG_COLOUR_TYPES:
        raise _fail(where, f"is corrupt (unknown PNG colour type {colour}); re-export it")
    if colour in (0, 4):
        raise _fail(
            where,
            f"is a {_PNG_COLOUR_TYPES[colour]} PNG; a colour (RGB) photo is needed",
        )
    found = _png_chunks(where, data)
    pixels = cv2.imdecode(np.frombuffer(data, dtype=np.uint8), cv2.IMREAD_UNCHANGED)
    if pixels is None:
        raise _fail(where, "is corrupt (its PNG image data cannot be decoded); re-export it")
    if pixels.ndim != 3 or pixels.shape[2] not in (3, 4):
        raise _fail(where, f"decodes to an unexpected shape {pixels.shape}; save it as RGB")
    if pixels.shape[2] == 4:
        rgb = _drop_alpha(where, cv2.cvtColor(pixels, cv2.COLOR_BGRA2RGBA))
        meta["alpha_dropped"] = True
    else:
        rgb = cv2.cvtColor(pixels, cv2.COLOR_BGR2RGB)
    meta["icc_profile"] = bool(found["icc_profile"])
    tags = _tags_from_exif_bytes(found["exif"])
    return _finish(
        where,
        rgb,
        path=where,
        use_srgb=linearise != "linear",
        tags=tags,
        metadata=meta,
    )


# --------------------------------------------------------------------------
# JPEG
# --------------------------------------------------------------------------

# Start-of-frame markers (ITU-T T.81 table B.1): C0-CF except DHT, JPG, DAC.
_JPEG_SOF = frozenset(range(0xC0, 0xD0)) - {0xC4, 0xC8, 0xCC}
_JPEG_STANDALONE = frozenset({0x01, *range(0xD0, 0xD8)})


def _scan_jpeg(where: str, data: bytes) -> dict:
    """Walk the JPEG marker structure without decoding pixels.

    Returns ``width``, ``height``, ``components``, ``exif`` (raw APP1 payload
    or None), ``icc_profile`` and ``complete`` (True when the end-of-image
    marker of the main picture was found after its scan data).
    """
    n = len(data)
    info: dict[str, Any] = {
        "width": None,
        "height": None,
        "components": None,
        "exif": None,
        "icc_profile": False,
        "complete": False,
    }
    truncated = "is truncated (the JPEG data ends early); copy the file again"
    pos = 2
    in_scan = False
    while True:
        if in_scan:
            # Entropy-coded data: 0xFF is followed by 0x00 (stuffing), a restart
            # marker, a fill byte, or the next marker.
            i = data.find(b"\xff", pos)
            if i < 0 or i + 1 >= n:
                return info
            code = data[i + 1]
            if code == 0x00 or 0xD0 <= code <= 0xD7 or code == 0xFF:
                pos = i + 1 if code == 0xFF else i + 2
                continue
            in_scan = False
            pos = i
        if pos >= n:
            if info["width"] is None:
                raise _fail(where, truncated)
            return info
        if data[pos] != 0xFF:
            # Stray bytes between segments: decoders skip them, and so does this walk.
            nxt = data.find(b"\xff", pos)
            if nxt < 0:
                raise _fail(where, "is corrupt (broken JPEG marker structure); re-export the photo")
            info["extraneous_bytes"] = info.get("extraneous_bytes", 0) + (nxt - pos)
            pos = nxt
        while pos < n and data[pos] == 0xFF:
            pos += 1
        if pos >= n:
            if info["width"] is None:
                raise _fail(where, truncated)
            return info
        marker = data[pos]
        pos += 1
        if marker == 0xD9:
            if info["width"] is None:
                raise _fail(where, "is corrupt (the JPEG has no image frame); re-export it")
            info["complete"] = True
            return info
        if marker in _JPEG_STANDALONE:
            continue
        if pos + 2 > n:
            if info["width"] is None:
                raise _fail(where, truncated)
            return info
        length = struct.unpack(">H", data[pos : pos + 2])[0]
        if length < 2:
            raise _fail(where, "is corrupt (a JPEG segment has an impossible length); re-export it")
        if pos + length > n:
            if info["width"] is None:
                raise _fail(where, truncated)
            return info
        segment = data[pos + 2 : pos + length]
        if marker in _JPEG_SOF and info["width"] is None:
            if len(segment) < 6:
                raise _fail(where, "is corrupt (its JPEG frame header is too short); re-export it")
            info["height"], info["width"] = struct.unpack(">HH", segment[1:5])
            info["components"] = segment[5]
        elif marker == 0xE1 and info["exif"] is None and segment.startswith(b"Exif\x00\x00"):
            info["exif"] = segment
        elif marker == 0xE2 and segment.startswith(b"ICC_PROFILE\x00"):
            info["icc_profile"] = True
        elif marker == 0xDA:
            if info["width"] is None:
                raise _fail(where, "is corrupt (JPEG scan data before any frame); re-export it")
            in_scan = True
        pos += length


def _read_jpeg(where: str, data: bytes, *, linearise: str, max_pixels: int, meta: dict) -> Photo:
    info = _scan_jpeg(where, data)
    _check_dimensions(where, info["width"], info["height"], max_pixels)
    if info["components"] == 1:
        raise _fail(where, "is a greyscale JPEG; a colour (RGB) photo is needed")
    if not info["complete"]:
        raise _fail(
            where,
            "is truncated (the JPEG end-of-image marker is missing); copy the file again",
        )
    try:
        # The plugin class is used directly: the size has been checked above
        # against max_pixels, and PIL's own (lower, global) limit must not apply.
        # PIL warns about damaged EXIF while opening; the EXIF is parsed (and
        # any problem recorded) separately below, so those warnings are muted.
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            image = JpegImagePlugin.JpegImageFile(io.BytesIO(data))
            mode = image.mode
            if mode == "RGB":
                image.load()
                rgb = np.asarray(image)
            else:
                rgb = None
            image.close()
    except (OSError, SyntaxError, ValueError) as exc:
        raise _fail(
            where, f"is a damaged JPEG that cannot be decoded ({_exc_text(exc)}); re-export it"
        ) from exc
    if rgb is None:
        if mode == "L":
            raise _fail(where, "is a greyscale JPEG; a colour (RGB) photo is needed")
        raise _fail(
            where,
            f"is a {mode} JPEG, which fringemap does not read; save it as an RGB (sRGB) JPEG, "
            "PNG or TIFF",
        )
    meta["icc_profile"] = bool(info["icc_profile"])
    if info.get("extraneous_bytes"):
        meta["jpeg_extraneous_bytes"] = int(info["extraneous_bytes"])
    tags = _tags_from_exif_bytes(info["exif"])
    return _finish(
        where,
        rgb,
        path=where,
        use_srgb=linearise != "linear",
        tags=tags,
        metadata=meta,
    )


# --------------------------------------------------------------------------
# TIFF
# --------------------------------------------------------------------------

_TIFF_PHOTOMETRIC_NAMES = {
    0: "greyscale",
    1: "greyscale",
    3: "palette",
    4: "mask",
    5: "CMYK",
    6: "YCbCr",
    8: "CIE L*a*b*",
    32844: "LogL",
    32845: "LogLuv",
}


def _tiff_tags(page: Any) -> _Tags:
    tags = page.tags

    def value(code: int) -> Any:
        tag = tags.get(code)
        return None if tag is None else tag.value

    exif = value(34665)
    exif = exif if isinstance(exif, dict) else {}
    return _tags_from_values(value(274), value(271), value(272), exif)


def _read_tiff(
    where: str, size: int, *, linearise: str, max_pixels: int, meta: dict
) -> Photo | None:
    """Read a TIFF file; return None when it is really a DNG (for the raw reader)."""
    with _collect_log("tifffile") as notes:
        photo = _read_tiff_quietly(
            where, size, linearise=linearise, max_pixels=max_pixels, meta=meta
        )
    if photo is not None and notes:
        photo.metadata["tiff_warnings"] = notes[:10]
    return photo


def _read_tiff_quietly(
    where: str, size: int, *, linearise: str, max_pixels: int, meta: dict
) -> Photo | None:
    try:
        tif = tifffile.TiffFile(where)
    except Exception as exc:
        raise _fail(
            where, f"is a damaged TIFF that cannot be opened ({_exc_text(exc)}); re-export it"
        ) from exc
    with tif:
        if len(tif.pages) == 0:
            raise _fail(where, "is a damaged TIFF with no readable image in it; re-export it")
        try:
            page = tif.pages.first
            if 50706 in page.tags:  # DNGVersion: a raw file with a .tif name
                return None
            width, height = int(page.imagewidth), int(page.imagelength)
        except Exception as exc:
            raise _fail(where, f"is a damaged TIFF ({_exc_text(exc)}); re-export it") from exc
        _check_dimensions(where, width, height, max_pixels)
        photometric = int(page.photometric)
        samples = int(page.samplesperpixel)
        if photometric != 2:  # RGB
            name = _TIFF_PHOTOMETRIC_NAMES.get(photometric, f"photometric {photometric}")
            if name == "greyscale":
                raise _fail(where, "is a greyscale TIFF; a colour (RGB) photo is needed")
            raise _fail(
                where,
                f"is a {name} TIFF, which fringemap does not read; save it as an RGB TIFF",
            )
        if samples < 3 or samples > 4:
            raise _fail(
                where,
                f"has {samples} samples per pixel; an RGB TIFF (3 samples, or 4 with alpha) "
                "is needed",
            )
        dtype = page.dtype
        if dtype is None or np.dtype(dtype) not in (
            np.dtype(np.uint8),
            np.dtype(np.uint16),
            np.dtype(np.float16),
            np.dtype(np.float32),
            np.dtype(np.float64),
        ):
            raise _fail(
                where,
                f"has {dtype if dtype is not None else 'unusual'} samples; save it as an 8- or "
                "16-bit unsigned or 32-bit floating-point TIFF",
            )
        offsets = _ints(page.dataoffsets)
        counts = _ints(page.databytecounts)
        if any(off + cnt > size for off, cnt in zip(offsets, counts, strict=False) if cnt > 0):
            raise _fail(
                where,
                "is truncated (its image data run past the end of the file); copy the file again",
            )
        axes = page.axes
        tags = _tiff_tags(page)
        meta["tiff_pages"] = len(tif.pages)
        meta["icc_profile"] = 34675 in page.tags
        try:
            pixels = page.asarray()
        except ValueError as exc:
            if "imagecodecs" not in str(exc):
                raise _fail(where, f"is a damaged TIFF ({_exc_text(exc)}); re-export it") from exc
            pixels = _decode_tiff_with_opencv(where)
            axes = "YXS"
        except Exception as exc:
            raise _fail(where, f"is a damaged TIFF ({_exc_text(exc)}); re-export it") from exc
    pixels = _tiff_to_channel_last(where, pixels, axes, height, width)
    if pixels.shape[2] == 4:
        pixels = _drop_alpha(where, pixels, is_float=pixels.dtype.kind == "f")
        meta["alpha_dropped"] = True
    use_srgb = linearise == "srgb" or (linearise == "auto" and pixels.dtype.kind == "u")
    return _finish(where, pixels, path=where, use_srgb=use_srgb, tags=tags, metadata=meta)


def _decode_tiff_with_opencv(where: str) -> np.ndarray:
    """Decode a TIFF whose compression tifffile cannot handle alone (e.g. LZW)."""
    try:
        data = Path(where).read_bytes()
    except OSError as exc:
        raise _fail(where, f"cannot be read ({exc.strerror or exc})") from exc
    pixels = cv2.imdecode(np.frombuffer(data, dtype=np.uint8), cv2.IMREAD_UNCHANGED)
    if pixels is None or pixels.ndim != 3 or pixels.shape[2] not in (3, 4):
        raise _fail(
            where,
            "uses a TIFF compression that cannot be decoded here; save it uncompressed or "
            "with ZIP (deflate) compression, or install imagecodecs",
        )
    code = cv2.COLOR_BGR2RGB if pixels.shape[2] == 3 else cv2.COLOR_BGRA2RGBA
    return cv2.cvtColor(pixels, code)


def _tiff_to_channel_last(
    where: str, pixels: np.ndarray, axes: str, height: int, width: int
) -> np.ndarray:
    """Reorder tifffile's axes (e.g. ``"SYX"``) to ``(H, W, S)``."""
    if len(axes) != pixels.ndim:
        axes = "YXS" if pixels.ndim == 3 else axes
    keep = [i for i, ax in enumerate(axes) if ax in "YXS"]
    for i, ax in enumerate(axes):
        if ax not in "YXS" and pixels.shape[i] != 1:
            raise _fail(where, f"holds an image stack (axes {axes}); save a single RGB image")
    pixels = pixels.reshape([pixels.shape[i] for i in keep])
    axes = "".join(axes[i] for i in keep)
    if sorted(axes) != ["S", "X", "Y"]:
        raise _fail(where, f"has an unexpected TIFF layout (axes {axes}); save it as RGB")
    pixels = np.transpose(pixels, [axes.index("Y"), axes.index("X"), axes.index("S")])
    if pixels.shape[:2] != (height, width):
        raise _fail(where, "is corrupt (decoded size differs from its header); re-export it")
    return np.ascontiguousarray(pixels)


# --------------------------------------------------------------------------
# Camera raw
# --------------------------------------------------------------------------


def _list_of_floats(value: Any) -> list[float] | None:
    if value is None:
        return None
    try:
        return [float(v) for v in np.asarray(value, dtype=np.float64).ravel()]
    except (TypeError, ValueError):
        return None


def _raw_photo(where: str, raw: Any, *, tags: _Tags, max_pixels: int, meta: dict) -> Photo:
    """Turn an opened raw-decoder object into a Photo.

    ``raw`` needs ``postprocess(**settings)`` returning a uint16 ``(H, W, 3)``
    array; ``sizes``, ``camera_whitebalance``, ``daylight_whitebalance``,
    ``black_level_per_channel``, ``white_level``, ``color_desc`` and ``other``
    are used when present. The output is linear: 16-bit codes / 65535, with 1
    the raw white level after white balance.
    """
    sizes = getattr(raw, "sizes", None)
    if sizes is not None:
        width, height = int(sizes.width), int(sizes.height)
        flip = int(getattr(sizes, "flip", 0) or 0)
        if flip in (5, 6):
            width, height = height, width
        _check_dimensions(where, width, height, max_pixels)
    else:
        flip = 0
    settings = dict(RAW_POSTPROCESS_SETTINGS)
    colour_space = _raw_srgb_colour_space()
    if colour_space is not None:
        settings["output_color"] = colour_space
    try:
        rgb = raw.postprocess(**settings)
    except FringemapError:
        raise
    except Exception as exc:
        raise _fail(
            where, f"is a raw file that cannot be developed ({_exc_text(exc)}); check the file"
        ) from exc
    rgb = np.asarray(rgb)
    if rgb.ndim != 3 or rgb.shape[2] != 3 or rgb.dtype != np.uint16:
        raise _fail(
            where,
            f"developed to an unexpected {rgb.dtype} array of shape {rgb.shape}; "
            "this raw format is not supported",
        )
    _check_dimensions(where, int(rgb.shape[1]), int(rgb.shape[0]), max_pixels)
    meta["camera_white_balance"] = _list_of_floats(getattr(raw, "camera_whitebalance", None))
    meta["daylight_white_balance"] = _list_of_floats(getattr(raw, "daylight_whitebalance", None))
    meta["black_level"] = _list_of_floats(getattr(raw, "black_level_per_channel", None))
    white = getattr(raw, "white_level", None)
    meta["white_level"] = None if white is None else float(white)
    desc = getattr(raw, "color_desc", None)
    if isinstance(desc, bytes):
        desc = desc.decode("ascii", errors="replace")
    meta["colour_filter"] = desc
    meta["raw_settings"] = {k: v for k, v in RAW_POSTPROCESS_SETTINGS.items()}
    other = getattr(raw, "other", None)
    if other is not None:
        for key, name in (("iso", "iso_speed"), ("exposure_time_s", "shutter_speed")):
            number = _as_float(getattr(other, name, None))
            if key not in meta and key not in tags.extra and number and number > 0:
                meta[key] = number
        number = _as_float(getattr(other, "aperture", None))
        if "f_number" not in tags.extra and number and number > 0:
            meta["f_number"] = number
        stamp = getattr(other, "timestamp", None)
        if tags.datetime_original is None and isinstance(stamp, _dt.datetime):
            if stamp.year > 1970:
                tags.datetime_original = stamp.strftime("%Y:%m:%d %H:%M:%S")
    orientation = _LIBRAW_FLIP_TO_EXIF.get(flip, 1)
    return _finish(
        where,
        rgb,
        path=where,
        use_srgb=False,
        tags=tags,
        metadata=meta,
        already_oriented=orientation,
    )


def _raw_srgb_colour_space() -> Any:
    try:
        import rawpy
    except ImportError:
        return None
    return rawpy.ColorSpace.sRGB


def _read_raw(where: str, data: bytes, *, linearise: str, max_pixels: int, meta: dict) -> Photo:
    if linearise == "srgb":
        raise OptionError(
            "raw files are always developed to linear light; use linearise='auto' or 'linear'",
            where="linearise",
        )
    try:
        import rawpy
    except ImportError as exc:
        raise _fail(
            where,
            "is a camera raw file and the raw decoder is not installed; "
            "install it with: pip install 'fringemap[raw]'",
        ) from exc
    tags = _Tags()
    if data[:4] in _TIFF_MAGICS:  # DNG, NEF, CR2, ARW...: EXIF lives in the TIFF structure
        tags = _tags_from_exif_bytes(data)
        tags.orientation = 1  # the raw decoder applies the orientation itself
        tags.extra.pop("orientation_ignored", None)
    try:
        raw = rawpy.imread(io.BytesIO(data))
    except rawpy.LibRawError as exc:
        raise _fail(
            where,
            f"is not a raw file the raw decoder can read ({_raw_error_text(exc)}); "
            "check that the file is complete, or export it as a 16-bit TIFF from a raw converter",
        ) from exc
    except Exception as exc:
        raise _fail(
            where, f"cannot be opened as a raw file ({_exc_text(exc)}); check the file"
        ) from exc
    with raw:
        try:
            return _raw_photo(where, raw, tags=tags, max_pixels=max_pixels, meta=meta)
        except rawpy.LibRawError as exc:
            raise _fail(
                where,
                f"is a damaged raw file ({_raw_error_text(exc)}); check that it is complete",
            ) from exc


def _raw_error_text(exc: Exception) -> str:
    text = exc.args[0] if exc.args else exc
    if isinstance(text, bytes):
        text = text.decode("utf-8", errors="replace")
    return _one_line(text) or type(exc).__name__


# --------------------------------------------------------------------------
# Public entry points
# --------------------------------------------------------------------------


def read_photo(
    path: str | os.PathLike[str],
    *,
    linearise: str = "auto",
    max_pixels: int = 400_000_000,
) -> Photo:
    """Read a photo file and decode it to linear-light RGB.

    Parameters
    ----------
    path : str or path-like
        A PNG (8/16-bit), JPEG, TIFF (8/16-bit unsigned, 16/32/64-bit float)
        or camera raw file (``.dng .cr2 .cr3 .nef .arw .raf .orf .rw2``). The
        format is recognised from the file's content; the name only matters
        for raw files.
    linearise : {"auto", "srgb", "linear"}
        How stored values become linear light. ``"auto"``: integer files are
        sRGB-decoded (IEC 61966-2-1), floating-point TIFF and raw files are
        taken as linear. ``"srgb"``: decode every non-raw file with the sRGB
        curve. ``"linear"``: take the stored values as linear (e.g. a 16-bit
        TIFF exported linear from a raw converter).
    max_pixels : int
        Largest accepted width x height, pixels; checked from the header
        before decoding.

    Returns
    -------
    Photo
        ``linear`` is float32 ``(H, W, 3)``, upright (EXIF orientation
        applied), nominally 0-1.

    Raises
    ------
    InputFileError
        The file is missing, a folder, empty, truncated, corrupt, of an
        unsupported format, not colour, partly transparent, too small, too
        large, or (float TIFF) holds NaN/infinite values.
    OptionError
        ``linearise`` or ``max_pixels`` has a bad value.
    """
    linearise = _check_linearise(linearise)
    max_pixels = _check_max_pixels(max_pixels)
    try:
        where = os.fspath(path)
    except TypeError as exc:
        raise OptionError(
            f"path must be a file path (str or path-like), got {type(path).__name__}",
            where="path",
        ) from exc
    if isinstance(where, bytes):
        where = os.fsdecode(where)
    suffix = Path(where).suffix.lower()

    try:
        info = os.stat(where)
    except FileNotFoundError as exc:
        raise _fail(where, "does not exist; check the file name and folder") from exc
    except PermissionError as exc:
        raise _fail(
            where, "cannot be reached (permission denied); check the folder's access rights"
        ) from exc
    except OSError as exc:
        raise _fail(where, f"cannot be read ({exc.strerror or exc})") from exc
    if stat.S_ISDIR(info.st_mode):
        raise _fail(where, "is a folder, not a photo file; give the path of a photo inside it")
    if not stat.S_ISREG(info.st_mode):
        raise _fail(where, "is not a regular file (a device or pipe?); give a photo file")
    if info.st_size == 0:
        raise _fail(where, "is empty (0 bytes); the copy or download may have failed")

    try:
        with open(where, "rb") as handle:
            head = handle.read(64)
    except PermissionError as exc:
        raise _fail(
            where, "cannot be read (permission denied); check the file's access rights"
        ) from exc
    except OSError as exc:
        raise _fail(where, f"cannot be read ({exc.strerror or exc})") from exc

    kind = _sniff(head, suffix)
    meta: dict[str, Any] = {"format": kind, "file_size": int(info.st_size)}
    expected = {
        "png": (".png",),
        "jpeg": (".jpg", ".jpeg", ".jpe", ".jfif"),
        "tiff": (".tif", ".tiff"),
    }.get(kind)
    if expected is not None and suffix not in expected:
        meta["extension_mismatch"] = suffix or "(none)"

    if kind == "text":
        raise _fail(where, f"is a text file, not an image; {_SUPPORTED_HINT}")
    if kind.startswith("unknown:"):
        name = kind.split(":", 1)[1]
        if name:
            raise _fail(
                where,
                f"is a {name} file, which fringemap does not read; "
                "convert it to 16-bit TIFF or PNG",
            )
        raise _fail(where, f"is not in a recognised image format; {_SUPPORTED_HINT}")

    if kind == "tiff":
        photo = _read_tiff(
            where, int(info.st_size), linearise=linearise, max_pixels=max_pixels, meta=meta
        )
        if photo is not None:
            return photo
        kind = meta["format"] = "raw"
        meta.pop("extension_mismatch", None)

    try:
        data = Path(where).read_bytes()
    except OSError as exc:
        raise _fail(where, f"cannot be read ({exc.strerror or exc})") from exc
    if kind == "png":
        return _read_png(where, data, linearise=linearise, max_pixels=max_pixels, meta=meta)
    if kind == "jpeg":
        return _read_jpeg(where, data, linearise=linearise, max_pixels=max_pixels, meta=meta)
    return _read_raw(where, data, linearise=linearise, max_pixels=max_pixels, meta=meta)


def photo_from_array(rgb: np.ndarray, *, encoding: str) -> Photo:
    """Wrap an in-memory RGB array (e.g. in a notebook) as a :class:`Photo`.

    Parameters
    ----------
    rgb : array-like, shape (H, W, 3)
        uint8 or uint16 codes (full scale 255 or 65535), or floating-point
        values with 1 = full scale. Channel last, RGB order. At least
        ``MIN_SIDE`` pixels each way; every value finite.
    encoding : {"srgb", "linear"}
        ``"srgb"``: the values are sRGB-encoded and are decoded to linear
        light. ``"linear"``: the values are linear light already (integer codes
        are divided by their full scale).

    Returns
    -------
    Photo
        With ``path=None``, ``orientation_applied=1`` and
        ``metadata={"format": "array"}``. ``saturated`` marks pixels with any
        channel at or above 98.5 % of full scale in the given values.

    Raises
    ------
    OptionError
        (``where="rgb"`` or ``"encoding"``) for a bad shape, dtype, size or
        non-finite values, or an unknown encoding.
    """
    if encoding not in ("srgb", "linear"):
        raise OptionError(
            f"encoding must be 'srgb' or 'linear', got {encoding!r}", where="encoding"
        )
    try:
        array = np.asarray(rgb)
    except Exception as exc:
        raise OptionError(
            f"rgb cannot be turned into an array ({_exc_text(exc)})", where="rgb"
        ) from exc
    if array.ndim != 3 or array.shape[2] != 3:
        raise OptionError(
            f"rgb must have shape (H, W, 3) (channel last, RGB), got {array.shape}", where="rgb"
        )
    if array.dtype not in (np.dtype(np.uint8), np.dtype(np.uint16)) and array.dtype.kind != "f":
        raise OptionError(
            f"rgb must be uint8, uint16 or floating point, got {array.dtype}", where="rgb"
        )
    height, width = array.shape[:2]
    if height < MIN_SIDE or width < MIN_SIDE:
        raise OptionError(
            f"rgb is too small ({width} x {height} pixels); at least {MIN_SIDE} x {MIN_SIDE} "
            "is needed",
            where="rgb",
        )
    if array.dtype.kind == "f" and not np.all(np.isfinite(array)):
        count = int(np.count_nonzero(~np.isfinite(array)))
        raise OptionError(
            f"rgb holds {count} non-finite values (NaN or infinity); replace them first",
            where="rgb",
        )
    try:
        return _finish(
            "rgb",
            array,
            path=None,
            use_srgb=encoding == "srgb",
            tags=_Tags(),
            metadata={"format": "array"},
        )
    except InputFileError as exc:  # pragma: no cover - all checks are done above
        raise OptionError(exc.message, where="rgb") from exc
