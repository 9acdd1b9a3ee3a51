"""Bad inputs at the command line: every command answers with one clean line and its exit code.

Each case of :data:`CASES` lays out its input files in a fresh working folder (two levels
below the test's ``tmp_path``, so ``../../x`` still lands inside it), runs
``fringemap.cli.main`` in this process and checks, whatever the command:

* the exit code documented in :mod:`fringemap.errors` (and ``docs/errors.md``);
* stderr is exactly one line, ``fringemap: error: ...``, naming the file or option at
  fault (the case lists the words that must appear), and no traceback;
* every file under ``tmp_path`` is unchanged (sha256 before and after: inputs untouched),
  nothing new exists outside ``--out``, and inside ``--out`` nothing of the failed photo
  (no ``<stem>.*``) and no temporary ``.partial`` file.

Photos are tiny (64 x 64) renders of :mod:`fringemap.simulate`. Further tests: valid but
unusual inputs (16-bit and float TIFF, a PNG named ``.jpg``...) that must work, ``--debug``
tracebacks, the decoder noise of a damaged video kept off stderr (in a subprocess), random
bytes and random recipes (hypothesis), and the exit codes listed in ``docs/errors.md``.
"""

from __future__ import annotations

import builtins
import errno
import hashlib
import io
import json
import math
import os
import re
import struct
import subprocess
import sys
import tempfile
import zlib
from collections.abc import Callable
from dataclasses import dataclass
from functools import cache
from pathlib import Path
from types import SimpleNamespace

import cv2
import numpy as np
import pytest
import tifffile
from hypothesis import HealthCheck, event, example, given, settings
from hypothesis import strategies as st
from PIL import Image

from fringemap import errors
from fringemap.cli import main
from fringemap.recipe import SCHEMA

ROOT = Path(__file__).resolve().parents[1]
STACK = ["--film", "sio2", "--substrate", "si", "--range", "0:1000", "-q"]
OUT = ["--out", "out"]
RECIPE = '[stack]\nfilm = "sio2"\nsubstrate = "si"\n[search]\nrange_nm = [0.0, 1000.0]\n'
ERROR = "fringemap: error: "


# ------------------------------------------------------------------ test photos


def _png(rgb: np.ndarray) -> bytes:
    image = rgb if rgb.ndim == 2 else cv2.cvtColor(rgb, cv2.COLOR_RGB2BGR)
    if rgb.ndim == 3 and rgb.shape[2] == 4:
        image = cv2.cvtColor(rgb, cv2.COLOR_RGBA2BGRA)
    ok, data = cv2.imencode(".png", image)
    assert ok
    return data.tobytes()


def _tiff(array: np.ndarray) -> bytes:
    buf = io.BytesIO()
    tifffile.imwrite(buf, array, photometric="rgb")
    return buf.getvalue()


@cache
def _render(kind: str):
    from fringemap.optics.stack import Stack
    from fringemap.simulate import render_photo, wedge

    stack = Stack.from_names(film="sio2", substrate="si")
    if kind == "wedge":
        t = wedge((64, 64), t0_nm=150.0, t1_nm=400.0)
        return render_photo(t, stack=stack, light="D65", seed=0, jpeg_quality=90)
    if kind == "flat":  # one uniform colour: a known-thickness reference area
        return render_photo(np.full((64, 64), 200.0), stack=stack, light="D65", noise=0.0)
    t = wedge((64, 64), t0_nm=1000.0, t1_nm=3000.0)  # fringes of a sodium lamp
    return render_photo(t, stack=stack, light="589", seed=0)


def wedge_rgb() -> np.ndarray:
    return _render("wedge").image


def good_png() -> bytes:
    return _png(wedge_rgb())


def good_jpg() -> bytes:
    return _render("wedge").jpeg_bytes


def flat_png() -> bytes:
    return _png(_render("flat").image)


def fringe_png() -> bytes:
    return _png(_render("fringe").image)


def huge_header_png() -> bytes:
    """A 100 000 x 100 000 px PNG header (and a token of data): ~100 bytes on disk."""

    def chunk(kind: bytes, data: bytes) -> bytes:
        return (
            struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))
        )

    ihdr = struct.pack(">IIBBBBB", 100_000, 100_000, 8, 2, 0, 0, 0)
    return (
        b"\x89PNG\r\n\x1a\n"
        + chunk(b"IHDR", ihdr)
        + chunk(b"IDAT", zlib.compress(b"\0" * 64))
        + chunk(b"IEND", b"")
    )


def grey_png() -> bytes:
    return _png(np.ascontiguousarray(wedge_rgb()[..., 1]))


def grey_alpha_png() -> bytes:
    la = np.dstack([wedge_rgb()[..., 1], np.full((64, 64), 255, np.uint8)])
    buf = io.BytesIO()
    Image.fromarray(la, "LA").save(buf, format="PNG")
    return buf.getvalue()


def rgba_png(transparent: bool) -> bytes:
    rgba = np.dstack([wedge_rgb(), np.full((64, 64), 255, np.uint8)])
    if transparent:
        rgba[:8, :8, 3] = 0
    return _png(rgba)


def bmp_bytes() -> bytes:
    ok, data = cv2.imencode(".bmp", cv2.cvtColor(wedge_rgb(), cv2.COLOR_RGB2BGR))
    assert ok
    return data.tobytes()


def linear_float() -> np.ndarray:
    from fringemap.colour.transfer import srgb_decode

    return srgb_decode(wedge_rgb() / 255.0).astype(np.float32)


def float_tiff(bad: float | None = None) -> bytes:
    values = linear_float()
    if bad is not None:
        values[5, 7, 1] = bad
    return _tiff(values)


def tiff16() -> bytes:
    return _tiff(wedge_rgb().astype(np.uint16) * 257)


def plain_png(value: int, size: int = 64) -> bytes:
    return _png(np.full((size, size, 3), value, np.uint8))


# ------------------------------------------------------------------ monkeypatches


def _under(path, folder: Path) -> bool:
    try:
        return Path(os.path.abspath(os.fspath(path))).is_relative_to(folder)
    except TypeError:  # a file descriptor or a file object
        return False


def deny_writes(mp: pytest.MonkeyPatch, ws: Path) -> None:
    """``out`` exists but may not be written (as a read-only folder would refuse for a user)."""
    folder = (ws / "out").resolve()
    real_open, real_os_open = builtins.open, os.open

    def guarded_open(file, mode="r", *args, **kwargs):
        if any(c in mode for c in "wxa+") and _under(file, folder):
            raise PermissionError(errno.EACCES, "Permission denied", os.fspath(file))
        return real_open(file, mode, *args, **kwargs)

    def guarded_os_open(path, flags, *args, **kwargs):
        if flags & (os.O_WRONLY | os.O_RDWR | os.O_CREAT) and _under(path, folder):
            raise PermissionError(errno.EACCES, "Permission denied", os.fspath(path))
        return real_os_open(path, flags, *args, **kwargs)

    mp.setattr(builtins, "open", guarded_open)
    mp.setattr(os, "open", guarded_os_open)


def deny_mkdir(mp: pytest.MonkeyPatch, ws: Path) -> None:
    """``out`` does not exist and its parent refuses new folders."""
    real = Path.mkdir

    def mkdir(self, *args, **kwargs):
        if _under(self, ws.resolve()):
            raise PermissionError(errno.EACCES, "Permission denied", str(self))
        return real(self, *args, **kwargs)

    mp.setattr(Path, "mkdir", mkdir)


def _disk_full(path) -> OSError:
    return OSError(errno.ENOSPC, "No space left on device", os.fspath(path))


def fail_chunks(pattern: str) -> Callable:
    """The byte writer of the atomic writers stops half-way (disk full) for matching files."""

    def patch(mp: pytest.MonkeyPatch, ws: Path) -> None:
        from fringemap.io import write as write_module

        real = write_module._write_chunks

        def half(handle, data):
            if pattern in os.path.basename(handle.name):
                view = memoryview(data)
                handle.write(view[: max(1, len(view) // 2)])
                handle.flush()
                raise _disk_full(handle.name)
            return real(handle, data)

        mp.setattr(write_module, "_write_chunks", half)

    return patch


def fail_tiff(mp: pytest.MonkeyPatch, ws: Path) -> None:
    """The TIFF encoder writes a few bytes of the thickness map, then the disk is full."""
    from fringemap.io import write as write_module

    def imwrite(path, *args, **kwargs):
        with open(path, "wb") as handle:
            handle.write(b"II*\x00" + b"\x00" * 64)
        raise _disk_full(path)

    mp.setattr(write_module, "tifffile", SimpleNamespace(imwrite=imwrite))


def fail_figures(mp: pytest.MonkeyPatch, ws: Path) -> None:
    """Every picture stops half-way."""
    from matplotlib.figure import Figure

    def savefig(self, fname, *args, **kwargs):
        if isinstance(fname, str | os.PathLike):
            with open(fname, "wb") as handle:
                handle.write(b"\x89PNG\r\n\x1a\n")
        raise _disk_full(fname)

    mp.setattr(Figure, "savefig", savefig)


def fail_report_pdf(mp: pytest.MonkeyPatch, ws: Path) -> None:
    """The map files are written; the report's PDF then stops half-way."""
    from fringemap.report import inspection_pdf

    def render_pdf(content, path):
        Path(path).write_bytes(b"%PDF-1.4\n")
        raise _disk_full(path)

    mp.setattr(inspection_pdf, "render_pdf", render_pdf)


def fail_simulated_note(mp: pytest.MonkeyPatch, ws: Path) -> None:
    """The simulator writes the photo, truth and settings, then its recipe stops half-way."""
    from fringemap import simulate
    from fringemap.io.write import atomic_path

    real = simulate._write

    def write(path, data):
        if path.name.endswith(".recipe.toml"):
            with atomic_path(path) as tmp:
                tmp.write_bytes(data[: len(data) // 2])
                raise _disk_full(tmp)
        return real(path, data)

    mp.setattr(simulate, "_write", write)


def no_png_decoding(mp: pytest.MonkeyPatch, ws: Path) -> None:
    """Reaching the PNG chunk walk (a step before decoding) is a bug for the huge header."""
    from fringemap.io import photo

    def boom(*args, **kwargs):
        raise AssertionError("the pixels were about to be decoded")

    mp.setattr(photo, "_png_chunks", boom)


# ------------------------------------------------------------------ the cases


@dataclass(frozen=True)
class Case:
    """One bad input.

    ``files`` maps a path (relative to the working folder) to its content: bytes, text,
    a function returning bytes, or None for a folder. ``names`` must all appear in the
    error line. ``allowed`` are files the run may create in ``--out`` (a batch summary,
    the outputs of the photos that worked); ``failed`` the lines ``fringemap: failed:``
    that precede the error line (batch).
    """

    id: str
    argv: tuple[str, ...]
    code: int
    names: tuple[str, ...]
    files: tuple[tuple[str, object], ...] = ()
    patch: Callable | None = None
    allowed: tuple[str, ...] = ()
    failed: int = 0
    stems: tuple[str, ...] = ()


def case(id, argv, code, names, files=None, **kw) -> Case:
    return Case(
        id=id,
        argv=tuple(argv),
        code=code,
        names=tuple(names),
        files=tuple((files or {}).items()),
        **kw,
    )


def _map(photo: str, *extra: str) -> list[str]:
    return ["map", photo, *STACK, *OUT, *extra]


PHOTO = {"photo.png": good_png}


def _recipe(text: str) -> dict:
    return {"photo.png": good_png, "recipe.toml": text}


def _recipe_case(id, text, code, names, **kw) -> Case:
    return case(
        id, ["map", "photo.png", "--recipe", "recipe.toml", *OUT], code, names, _recipe(text), **kw
    )


CSV_GOOD_ROWS = "".join(f"{w},{1.46 - w * 1e-5:.5f}\n" for w in range(350, 851, 50))

CASES: list[Case] = [
    # --- photo files (map)
    case("zero-byte", _map("empty.png"), 3, ["empty.png", "empty"], {"empty.png": b""}),
    case(
        "truncated-png",
        _map("cut.png"),
        3,
        ["cut.png", "truncated"],
        {"cut.png": lambda: good_png()[: len(good_png()) // 2]},
    ),
    case(
        "truncated-jpeg",
        _map("cut.jpg"),
        3,
        ["cut.jpg", "truncated"],
        {"cut.jpg": lambda: good_jpg()[: len(good_jpg()) // 2]},
    ),
    case("bmp-named-jpg", _map("shot.jpg"), 3, ["shot.jpg", "BMP"], {"shot.jpg": bmp_bytes}),
    case(
        "text-file",
        _map("notes.png"),
        3,
        ["notes.png", "text file"],
        {"notes.png": "exposure 1/60 s at f/8\n"},
    ),
    case("missing-photo", _map("nothere.png"), 3, ["nothere.png", "does not exist"]),
    case("photo-is-folder", _map("shots"), 3, ["shots", "folder"], {"shots/": None}),
    case(
        "one-pixel",
        _map("dot.png"),
        3,
        ["dot.png", "too small"],
        {"dot.png": lambda: plain_png(128, 1)},
    ),
    case(
        "huge-header",
        _map("huge.png"),
        3,
        ["huge.png", "too large", "100000 x 100000", "limit 400"],
        {"huge.png": huge_header_png},
        patch=no_png_decoding,
    ),
    case("one-channel", _map("grey.png"), 3, ["grey.png", "greyscale"], {"grey.png": grey_png}),
    case(
        "two-channel",
        _map("la.png"),
        3,
        ["la.png", "greyscale+alpha"],
        {"la.png": grey_alpha_png},
    ),
    case(
        "four-channel-transparent",
        _map("rgba.png"),
        3,
        ["rgba.png", "transparent"],
        {"rgba.png": lambda: rgba_png(True)},
    ),
    case(
        "float-tiff-nan",
        _map("nan.tif"),
        3,
        ["nan.tif", "NaN"],
        {"nan.tif": lambda: float_tiff(math.nan)},
    ),
    case(
        "float-tiff-inf",
        _map("inf.tif"),
        3,
        ["inf.tif", "non-finite"],
        {"inf.tif": lambda: float_tiff(math.inf)},
    ),
    case(
        "all-black",
        _map("black.png"),
        5,
        ["black.png", "black"],
        {"black.png": lambda: plain_png(0)},
    ),
    case(
        "all-saturated",
        _map("white.png"),
        5,
        ["white.png", "saturated"],
        {"white.png": lambda: plain_png(255)},
    ),
    case(
        "one-of-two-bad",
        ["map", "good.png", "empty.png", *STACK, *OUT],
        6,
        ["empty.png", "empty"],
        {"good.png": good_png, "empty.png": b""},
        allowed=tuple(
            f"good{s}"
            for s in (
                ".thickness.tif",
                ".confidence.tif",
                ".reasons.tif",
                ".map.png",
                ".stats.json",
            )
        ),
        stems=("empty",),
    ),
    # --- recipes
    _recipe_case(
        "recipe-unknown-key",
        RECIPE + '[light]\nsorce = "D65"\n',
        2,
        ["recipe.toml", "light.sorce", "known in [light]"],
    ),
    _recipe_case(
        "recipe-unknown-section",
        RECIPE + '[lamp]\nsource = "D65"\n',
        2,
        ["recipe.toml", "[lamp]"],
    ),
    _recipe_case(
        "recipe-wrong-type",
        RECIPE + '[light]\nangle_deg = "ten"\n',
        2,
        ["recipe.toml", "light.angle_deg", "expected a number"],
    ),
    _recipe_case(
        "recipe-nan",
        RECIPE + "[light]\naperture = nan\n",
        2,
        ["recipe.toml", "light.aperture", "finite"],
    ),
    _recipe_case(
        "recipe-negative-index",
        '[stack]\nfilm = -1.46\nsubstrate = "si"\n',
        2,
        ["recipe.toml", "stack.film"],
    ),
    _recipe_case(
        "recipe-inverted-range",
        '[stack]\nfilm = "sio2"\nsubstrate = "si"\n[search]\nrange_nm = [900.0, 100.0]\n',
        2,
        ["recipe.toml", "search.range_nm", "below MAX"],
    ),
    _recipe_case(
        "recipe-not-utf8",
        b'[stack]\nfilm = "sio\xff\xfe2"\n',
        2,
        ["recipe.toml", "UTF-8"],
    ),
    _recipe_case("recipe-invalid-toml", "[stack\nfilm = \n", 2, ["recipe.toml", "TOML"]),
    _recipe_case(
        "recipe-python-code",
        "import os\nos.system('touch PWNED')\n",
        2,
        ["recipe.toml", "TOML"],
    ),
    _recipe_case(
        "recipe-code-as-material",
        "[stack]\nfilm = \"__import__('os').system('touch X')\"\nsubstrate = \"si\"\n",
        2,
        ["recipe.toml", "stack.film", "unknown material"],
    ),
    _recipe_case(
        "recipe-mask-path-outside",
        RECIPE + '[measure]\nroi = "mask:../../x.png"\n',
        3,
        ["recipe.toml", "measure.roi", "../../x.png"],
    ),
    _recipe_case(
        "recipe-camera-path-outside",
        RECIPE + '[camera]\ncalibration = "../../cam.toml"\n',
        3,
        ["../../cam.toml", "camera file"],
    ),
    _recipe_case(
        "recipe-table-too-large",
        '[stack]\nfilm = "sio2"\nsubstrate = "si"\n[search]\nrange_nm = [0.0, 1e9]\n',
        2,
        ["--range", "narrow"],
    ),
    _recipe_case(
        "recipe-bad-spec",
        RECIPE + '[report]\nspec = "100+-0"\n',
        2,
        ["recipe.toml", "report.spec", "TOL > 0"],
    ),
    case(
        "recipe-missing",
        ["map", "photo.png", "--recipe", "nothere.toml", *OUT],
        3,
        ["nothere.toml", "not found"],
        PHOTO,
    ),
    # --- materials, lights, sensors (with suggestions)
    case(
        "unknown-material",
        ["map", "photo.png", "--film", "sio2x", "--substrate", "si", *OUT],
        2,
        ["--film", "unknown material", "did you mean", "sio2"],
        PHOTO,
    ),
    case(
        "unknown-substrate",
        ["map", "photo.png", "--film", "sio2", "--substrate", "silicn", *OUT],
        2,
        ["--substrate", "did you mean", "silicon"],
        PHOTO,
    ),
    case("unknown-light", _map("photo.png", "--light", "D66"), 2, ["--light", "D65"], PHOTO),
    case("unknown-sensor", _map("photo.png", "--sensor", "eye"), 2, ["--sensor", "cie1931"], PHOTO),
    case(
        "layer-without-thickness",
        _map("photo.png", "--layer", "si3n4"),
        2,
        ["--layer", "MATERIAL:THICKNESS_NM"],
        PHOTO,
    ),
    # --- CSV spectra and index files
    case(
        "index-csv-not-monotonic",
        ["map", "photo.png", "--film", "n.csv", "--substrate", "si", *OUT],
        2,
        ["n.csv", "increase"],
        {**PHOTO, "n.csv": "wavelength_nm,n\n400,1.47\n600,1.46\n500,1.465\n800,1.45\n"},
    ),
    case(
        "index-csv-missing-wavelength",
        ["map", "photo.png", "--film", "n.csv", "--substrate", "si", *OUT],
        2,
        ["n.csv", "line 3"],
        {**PHOTO, "n.csv": "wavelength_nm,n\n400,1.47\n,1.46\n800,1.45\n"},
    ),
    case(
        "index-csv-too-narrow",
        ["map", "photo.png", "--film", "n.csv", "--substrate", "si", *OUT],
        2,
        ["n.csv", "500-600 nm"],
        {**PHOTO, "n.csv": "wavelength_nm,n\n500,1.46\n600,1.455\n"},
    ),
    case(
        "light-csv-not-monotonic",
        _map("photo.png", "--light", "lamp.csv"),
        2,
        ["--light", "lamp.csv", "increase"],
        {**PHOTO, "lamp.csv": "wavelength_nm,power\n380,1\n600,1\n500,1\n780,1\n"},
    ),
    case(
        "light-csv-missing-wavelengths",
        _map("photo.png", "--light", "lamp.csv"),
        2,
        ["--light", "lamp.csv", "400-760 nm"],
        {**PHOTO, "lamp.csv": "wavelength_nm,power\n500,1\n550,1\n600,1\n"},
    ),
    case(
        "sensor-csv-columns",
        _map("photo.png", "--sensor", "eye.csv"),
        2,
        ["--sensor", "eye.csv", "4 columns"],
        {**PHOTO, "eye.csv": "wavelength_nm,r,g,b\n400,1,1\n500,1,1\n"},
    ),
    # --- geometry outside the image
    case("roi-outside", _map("photo.png", "--roi", "rect:100,100,200,200"), 2, ["--roi"], PHOTO),
    case("anchor-outside", _map("photo.png", "--anchor", "500,5=0"), 2, ["--anchor", "500"], PHOTO),
    case(
        "profile-outside",
        _map("photo.png", "--profile", "0,0:500,500"),
        2,
        ["--profile", "(500, 500)"],
        PHOTO,
    ),
    case(
        "mask-other-size",
        _map("photo.png", "--roi", "mask:mask.png"),
        2,
        ["--roi"],
        {**PHOTO, "mask.png": lambda: plain_png(255, 32)},
    ),
    case(
        "chart-corners-outside",
        ["calibrate", "photo.png", "--corners", "0,0,100,0,100,100,0,100", "--out", "cam.toml"],
        2,
        ["--corners", "outside"],
        PHOTO,
    ),
    case(
        "reference-outside",
        ["calibrate", "flat.png", "--reference", "300,30,5=200", *STACK, "--out", "cam.toml"],
        2,
        ["--reference", "outside"],
        {"flat.png": flat_png},
    ),
    case(
        "thicker-at-outside",
        [
            "fringes",
            "fr.png",
            "--light",
            "589",
            *STACK,
            "--anchor",
            "0,32=1000",
            "--thicker-at",
            "500,5",
            *OUT,
        ],
        2,
        ["--thicker-at", "outside"],
        {"fr.png": fringe_png},
    ),
    # --- output folder problems
    case(
        "out-is-a-file",
        ["map", "photo.png", *STACK, "--out", "notes.txt"],
        4,
        ["notes.txt", "not a folder"],
        {**PHOTO, "notes.txt": "x\n"},
    ),
    case(
        "out-under-a-file",
        ["map", "photo.png", *STACK, "--out", "notes.txt/maps"],
        4,
        ["notes.txt/maps", "cannot be created"],
        {**PHOTO, "notes.txt": "x\n"},
    ),
    case(
        "out-not-writable",
        _map("photo.png"),
        4,
        ["out", "not writable", "Permission denied"],
        {**PHOTO, "out/": None},
        patch=deny_writes,
    ),
    case(
        "out-cannot-be-created",
        _map("photo.png"),
        4,
        ["out", "cannot be created"],
        PHOTO,
        patch=deny_mkdir,
    ),
    case(
        "batch-out-not-writable",
        ["batch", "photo.png", *STACK, *OUT, "--workers", "1"],
        4,
        ["out", "not writable"],
        {**PHOTO, "out/": None},
        patch=deny_writes,
    ),
    case(
        "chart-out-not-writable",
        ["chart", *STACK, *OUT],
        4,
        ["out", "not writable"],
        {"out/": None},
        patch=deny_writes,
    ),
    case(
        "out-clashes-with-photo-named-like-output",
        ["map", "a.png", "a.map.png", *STACK, "--out", "."],
        4,
        ["a.map.png", "would overwrite the input"],
        {"a.png": good_png, "a.map.png": good_png},
    ),
    case(
        "colour-photo-named-like-output",
        [
            "fringes",
            "fr.png",
            *STACK,
            "--light",
            "589",
            "--anchor",
            "0,32=1000",
            "--colour-photo",
            "fr.map.png",
            "--out",
            ".",
        ],
        4,
        ["fr.map.png", "would overwrite the input"],
        {"fr.png": fringe_png, "fr.map.png": good_png},
    ),
    case(
        "batch-out-is-input-folder",
        ["batch", "shots", *STACK, "--out", "shots", "--workers", "1"],
        4,
        ["shots", "input folder"],
        {"shots/a.png": good_png},
    ),
    case(
        "batch-photo-named-like-output",
        ["batch", "shots/a.png", "shots/a.map.png", *STACK, "--out", "shots", "--workers", "1"],
        4,
        ["a.map.png", "would overwrite the input"],
        {"shots/a.png": good_png, "shots/a.map.png": good_png},
    ),
    case(
        "calibrate-out-over-recipe",
        [
            "calibrate",
            "flat.png",
            "--reference",
            "30,30,5=200",
            "--recipe",
            "cam.toml",
            "--out",
            "cam.toml",
        ],
        4,
        ["cam.toml", "would overwrite the input"],
        {"flat.png": flat_png, "cam.toml": RECIPE},
    ),
    case(
        "calibrate-out-not-toml",
        ["calibrate", "flat.png", "--reference", "30,30,5=200", *STACK, "--out", "flat.png"],
        2,
        ["--out", ".toml"],
        {"flat.png": flat_png},
    ),
    case(
        "chart-name-escapes-out",
        ["chart", *STACK, *OUT, "--name", "../../escape"],
        2,
        ["--name", "../../escape"],
    ),
    # --- writes that fail half-way
    case(
        "map-write-fails-halfway",
        _map("photo.png"),
        4,
        ["photo.stats.json", "No space"],
        PHOTO,
        patch=fail_chunks(".stats.json"),
    ),
    case(
        "map-tiff-fails-halfway",
        _map("photo.png"),
        4,
        ["photo.thickness.tif", "No space"],
        PHOTO,
        patch=fail_tiff,
    ),
    case(
        "map-report-fails-halfway",
        _map("photo.png", "--report"),
        4,
        ["photo.report.pdf", "No space"],
        PHOTO,
        patch=fail_report_pdf,
    ),
    case(
        "batch-write-fails-halfway",
        ["batch", "photo.png", *STACK, *OUT, "--workers", "1"],
        6,
        ["batch-summary.csv", "1 of 1 photos failed"],
        PHOTO,
        patch=fail_chunks(".stats.json"),
        allowed=("batch-summary.csv", "batch-summary.json"),
        failed=1,
        stems=("photo",),
    ),
    case(
        "series-write-fails-halfway",
        ["series", "f_t0s.png", "f_t5s.png", *STACK, *OUT],
        4,
        ["series.json", "No space"],
        {"f_t0s.png": good_png, "f_t5s.png": good_png},
        patch=fail_chunks("series.json"),
        stems=("series", "kymograph"),
    ),
    case(
        "chart-write-fails-halfway",
        ["chart", *STACK, *OUT, "--name", "ox"],
        4,
        ["ox.chart.png", "No space"],
        patch=fail_figures,
        stems=("ox",),
    ),
    case(
        "calibrate-write-fails-halfway",
        ["calibrate", "flat.png", "--reference", "30,30,5=200", *STACK, "--out", "cam.toml"],
        4,
        ["cam.toml", "No space"],
        {"flat.png": flat_png},
        patch=fail_chunks("cam.toml"),
    ),
    case(
        "fringes-write-fails-halfway",
        ["fringes", "fr.png", "--light", "589", *STACK, "--anchor", "0,32=1000", *OUT],
        4,
        ["fr.stats.json", "No space"],
        {"fr.png": fringe_png},
        patch=fail_chunks(".stats.json"),
    ),
    case(
        "simulate-write-fails-halfway",
        ["simulate", "soap-frame", "-q", *OUT],
        4,
        ["soap-frame.recipe.toml", "No space"],
        patch=fail_simulated_note,
        stems=("soap-frame",),
    ),
    # --- options
    case(
        "spec-zero-tolerance", _map("photo.png", "--spec", "100±0"), 2, ["--spec", "TOL > 0"], PHOTO
    ),
    case("spec-negative-tolerance", _map("photo.png", "--spec", "100+-5x"), 2, ["--spec"], PHOTO),
    case("scale-zero", _map("photo.png", "--scale", "0"), 2, ["--scale", "> 0"], PHOTO),
    case("angle-not-a-number", _map("photo.png", "--angle", "abc"), 2, ["--angle", "abc"], PHOTO),
    case("aperture-out-of-range", _map("photo.png", "--aperture", "1.5"), 2, ["--aperture"], PHOTO),
    case("range-inverted", _map("photo.png", "--range", "800:100"), 2, ["--range"], PHOTO),
    case("sites-unknown", _map("photo.png", "--sites", "7"), 2, ["--sites", "49"], PHOTO),
    case(
        "scheduler-bad-address",
        ["batch", "photo.png", *STACK, *OUT, "--scheduler", "tcp//host"],
        2,
        ["--scheduler", "tcp://HOST:PORT"],
        PHOTO,
    ),
    case(
        "workers-zero",
        ["batch", "photo.png", *STACK, *OUT, "--workers", "0"],
        2,
        ["--workers"],
        PHOTO,
    ),
    case("batch-needs-out", ["batch", "photo.png", *STACK], 2, ["--out", "required"], PHOTO),
    case("unknown-command", ["measure", "photo.png"], 2, ["measure", "invalid choice"], PHOTO),
    case("materials-unknown-option", ["materials", "--yaml"], 2, ["--yaml"]),
    case(
        "simulate-unknown-scenario",
        ["simulate", "oil-slick", *OUT],
        2,
        ["scenario", "oil-slick", "soap-frame"],
    ),
    case(
        "fringes-white-light",
        ["fringes", "fr.png", *STACK, "--light", "D65", *OUT],
        2,
        ["--light", "not narrow"],
        {"fr.png": fringe_png},
    ),
    case(
        "fringes-visibility",
        ["fringes", "fr.png", *STACK, "--light", "589", "--visibility-threshold", "2", *OUT],
        2,
        ["--visibility-threshold"],
        {"fr.png": fringe_png},
    ),
    case(
        "fringes-colour-photo-empty",
        ["fringes", "fr.png", *STACK, "--light", "589", "--colour-photo", "c.png", *OUT],
        3,
        ["c.png", "empty"],
        {"fr.png": fringe_png, "c.png": b""},
    ),
    case(
        "series-video-step-zero",
        ["series", "clip.avi", *STACK, *OUT, "--video-step", "0"],
        2,
        ["--video-step"],
        {"clip.avi": b"RIFF"},
    ),
    # --- input sets, videos, camera files
    case(
        "batch-empty-folder",
        ["batch", "shots", *STACK, *OUT, "--workers", "1"],
        3,
        ["shots", "no photos found"],
        {"shots/": None},
    ),
    case(
        "batch-glob-matches-nothing",
        ["batch", "shots/*.tif", *STACK, *OUT],
        3,
        ["shots/*.tif", "no photos found"],
        {"shots/a.png": good_png},
    ),
    case(
        "batch-one-corrupt-photo",
        ["batch", "shots", *STACK, *OUT, "--workers", "1"],
        6,
        ["batch-summary.csv", "1 of 1 photos failed"],
        {"shots/cut.jpg": lambda: good_jpg()[:300]},
        allowed=("batch-summary.csv", "batch-summary.json"),
        failed=1,
        stems=("cut",),
    ),
    case(
        "series-empty-folder",
        ["series", "frames", *STACK, *OUT],
        3,
        ["frames", "no photos found"],
        {"frames/": None},
    ),
    case(
        "series-unreadable-frames",
        ["series", "a_t0s.png", "b_t1s.png", *STACK, *OUT],
        3,
        ["a_t0s.png", "could be read"],
        {"a_t0s.png": b"", "b_t1s.png": "not a photo\n"},
    ),
    case(
        "video-cannot-be-opened",
        ["series", "clip.mp4", *STACK, *OUT],
        3,
        ["clip.mp4", "cannot be opened as a video"],
        {"clip.mp4": b"\x00\x01 not a video" * 8},
    ),
    case(
        "camera-file-damaged",
        _map("photo.png", "--camera", "cam.toml"),
        3,
        ["cam.toml", "not valid TOML"],
        {**PHOTO, "cam.toml": "[camera\nmatrix = [1, 2"},
    ),
    case(
        "camera-file-incomplete",
        _map("photo.png", "--camera", "cam.toml"),
        3,
        ["cam.toml", "format"],
        {**PHOTO, "cam.toml": 'method = "reference-gains"\n'},
    ),
    case(
        "camera-file-missing",
        ["chart", *STACK, *OUT, "--camera", "nothere.toml"],
        3,
        ["nothere.toml", "not found"],
    ),
]


# ------------------------------------------------------------------ checking


def _tree(root: Path) -> dict[str, str]:
    """Every file (sha256) and folder ("<dir>") under ``root``, hidden ones too."""
    found: dict[str, str] = {}
    for folder, dirs, files in os.walk(root):
        for d in dirs:
            found[os.path.relpath(os.path.join(folder, d), root)] = "<dir>"
        for f in files:
            path = os.path.join(folder, f)
            with open(path, "rb") as handle:
                found[os.path.relpath(path, root)] = hashlib.sha256(handle.read()).hexdigest()
    return found


def _lay_out(ws: Path, files) -> None:
    for name, content in files:
        path = ws / name
        if content is None:
            path.mkdir(parents=True, exist_ok=True)
            continue
        path.parent.mkdir(parents=True, exist_ok=True)
        data = content() if callable(content) else content
        if isinstance(data, str):
            data = data.encode("utf-8")
        path.write_bytes(data)


def _out_of(argv) -> str | None:
    argv = list(argv)
    return argv[argv.index("--out") + 1] if "--out" in argv else None


def _stems(c: Case) -> set[str]:
    """Stems of the photos a failed case must leave no output for."""
    if c.stems:
        return set(c.stems)
    return {Path(name).name.split(".")[0] for name, content in c.files if content is not None}


@pytest.fixture
def workspace(tmp_path, monkeypatch):
    ws = tmp_path / "lab" / "bench"
    ws.mkdir(parents=True)
    monkeypatch.chdir(ws)
    return ws


def test_cases_are_many_and_distinct():
    ids = [c.id for c in CASES]
    assert len(ids) == len(set(ids))
    assert len(CASES) >= 40
    commands = {c.argv[0] for c in CASES}
    assert {"map", "batch", "series", "chart", "calibrate", "fringes", "materials"} <= commands
    assert "simulate" in commands


#: the error line and exit code each case printed (compared with docs/errors.md below)
OBSERVED: dict[str, tuple[str, int]] = {}


@pytest.mark.parametrize("c", CASES, ids=[c.id for c in CASES])
def test_bad_input(c: Case, workspace: Path, tmp_path: Path, monkeypatch, capsys):
    _lay_out(workspace, c.files)
    before = _tree(tmp_path)
    if c.patch is not None:
        c.patch(monkeypatch, workspace)
    code = main(list(c.argv))
    monkeypatch.undo()
    captured = capsys.readouterr()
    lines = captured.err.splitlines()

    # the exit code, and one line that names the culprit
    assert code == c.code, captured.err
    assert "Traceback" not in captured.err
    assert len(lines) == 1 + c.failed, captured.err
    assert all(line.startswith("fringemap: failed: ") for line in lines[: c.failed]), lines
    line = lines[-1]
    assert line.startswith(ERROR), line
    for name in c.names:
        assert name in line, f"{name!r} missing from: {line}"
    if c.failed:
        assert all(any(s in f for s in _stems(c)) for f in lines[: c.failed]), lines
    OBSERVED[c.id] = (line, code)

    # inputs unchanged, nothing new outside --out, no trace of the failed photo in it
    after = _tree(tmp_path)
    assert {k: v for k, v in after.items() if k in before} == before, "a file was changed"
    out = _out_of(c.argv)
    out_rel = os.path.normpath(os.path.relpath(workspace / out, tmp_path)) if out else None
    allowed = {out_rel} | {os.path.join(out_rel, a) for a in c.allowed} if out_rel else set()
    new = set(after) - set(before)
    assert new <= allowed, f"written outside the allowed outputs: {sorted(new - allowed)}"
    assert not [k for k in after if k.endswith(".partial")]
    for stem in _stems(c):
        assert not [k for k in new if os.path.basename(k).startswith(f"{stem}.")]
    assert not (tmp_path / "x.png").exists() and not (workspace / "PWNED").exists()
    assert not (workspace / "X").exists()


# ------------------------------------------------------------------ valid, if unusual


VALID = {
    "photo.png": good_png,
    "wrong-extension.jpg": good_png,  # a PNG with a JPEG name: read by its content
    "photo.jpg": good_jpg,
    "deep.tif": tiff16,
    "linear.tif": float_tiff,
    "opaque.png": lambda: rgba_png(False),
}


def test_unusual_but_valid_photos_work(workspace, capsys):
    """16-bit and float TIFFs, opaque RGBA and a misnamed PNG are measured like the PNG."""
    _lay_out(workspace, VALID.items())
    assert main(["map", *VALID, *STACK, *OUT]) == 0, capsys.readouterr().err
    assert capsys.readouterr().err == ""
    means = {}
    for name in VALID:
        doc = json.loads((workspace / "out" / f"{Path(name).stem}.stats.json").read_text())
        means[name] = doc["mean_nm"]
    reference = means["photo.png"]
    assert 240 < reference < 310  # the wedge runs from 150 to 400 nm
    for name, mean in means.items():
        assert abs(mean - reference) < 6, (name, means)


def test_same_stem_in_a_map_gets_distinct_outputs(workspace, capsys):
    """Repeated stems are numbered, never onto another photo's own stem."""
    _lay_out(workspace, {"x/a.png": good_png, "y/a.png": good_png, "a-1.png": good_png}.items())
    assert main(["map", "x/a.png", "y/a.png", "a-1.png", *STACK, *OUT]) == 0
    names = sorted(p.name for p in (workspace / "out").glob("*.stats.json"))
    assert names == ["a-1.stats.json", "a-2.stats.json", "a.stats.json"]
    sources = {json.loads((workspace / "out" / n).read_text())["source"] for n in names}
    assert len(sources) == 3


def test_same_stem_in_a_batch_gets_distinct_outputs(workspace, capsys):
    _lay_out(workspace, {"a/shot.png": good_png, "b/shot.png": good_png}.items())
    assert main(["batch", "a", "b", *STACK, *OUT, "--workers", "1"]) == 0
    names = sorted(p.name for p in (workspace / "out").glob("*.stats.json"))
    assert names == ["a_shot.stats.json", "b_shot.stats.json"]


# ------------------------------------------------------------------ --debug, subprocesses


def _run(*argv: str, cwd: Path) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONWARNINGS": "error"}
    return subprocess.run(
        [sys.executable, "-m", "fringemap", *argv],
        cwd=cwd,
        capture_output=True,
        text=True,
        timeout=120,
        env=env,
    )


def test_debug_shows_the_traceback_and_keeps_the_exit_code(workspace, capsys):
    (workspace / "empty.png").write_bytes(b"")
    argv = ["calibrate", "empty.png", "--corners", "1,1,9,1,9,9,1,9", "--out", "cam.toml"]
    assert main(argv) == 3
    assert "Traceback" not in capsys.readouterr().err
    assert main([*argv, "--debug"]) == 3
    err = capsys.readouterr().err
    assert "Traceback (most recent call last)" in err and "InputFileError" in err
    assert err.splitlines()[-1].startswith(ERROR + "empty.png: is empty")


def test_debug_shows_the_traceback_of_a_photo_that_fails_in_map(workspace, capsys):
    (workspace / "empty.png").write_bytes(b"")
    argv = ["map", "empty.png", *STACK, *OUT]
    assert main(argv) == 3
    assert "Traceback" not in capsys.readouterr().err
    assert main([*argv, "--debug"]) == 3
    err = capsys.readouterr().err
    assert "Traceback (most recent call last)" in err and "InputFileError" in err
    assert err.splitlines()[-1].startswith(ERROR + "empty.png: is empty")


def test_damaged_video_in_a_real_process(workspace):
    """The video decoder's own complaints never reach the terminal: one line, exit 3."""
    (workspace / "clip.mp4").write_bytes(b"\x00\x00\x00\x18ftypmp42" + b"\x01" * 200)
    done = _run("series", "clip.mp4", *STACK, *OUT, cwd=workspace)
    assert done.returncode == 3, done.stderr
    assert done.stderr.splitlines() == [
        f"{ERROR}clip.mp4: cannot be opened as a video (unknown container or codec, or "
        "damaged); convert it to an MJPG AVI or H.264 MP4, or save its frames as photos"
    ]
    assert not (workspace / "out" / "series.csv").exists()


def test_usage_error_in_a_real_process(workspace):
    done = _run("map", "x.png", "--angle", "steep", cwd=workspace)
    assert done.returncode == 2
    assert done.stderr.splitlines() == [
        f"{ERROR}argument --angle: invalid float value: 'steep' (see fringemap map --help)"
    ]


def test_mask_that_is_missing_prints_no_decoder_warning(workspace):
    (workspace / "photo.png").write_bytes(good_png())
    done = _run("map", "photo.png", *STACK, *OUT, "--roi", "mask:gone.png", cwd=workspace)
    assert done.returncode == 3
    assert len(done.stderr.splitlines()) == 1 and "--roi" in done.stderr


# ------------------------------------------------------------------ hypothesis


def _one_clean_line(err: str) -> str:
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith(ERROR) and "Traceback" not in err, err
    return lines[0]


HEADERS = st.sampled_from(
    [b"", b"\x89PNG\r\n\x1a\n", b"\xff\xd8\xff", b"II*\x00", b"MM\x00*", b"GIF89a", b"BM"]
)


@settings(
    max_examples=60,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(
    head=HEADERS, body=st.binary(max_size=600), name=st.sampled_from(["p.png", "p.jpg", "p.tif"])
)
def test_random_bytes_as_a_photo(head, body, name, capsys):
    with tempfile.TemporaryDirectory() as tmp:
        photo = Path(tmp, name)
        photo.write_bytes(head + body)
        code = main(
            [
                "calibrate",
                str(photo),
                "--corners",
                "1,1,9,1,9,9,1,9",
                "--out",
                str(Path(tmp, "cam.toml")),
            ]
        )
        line = _one_clean_line(capsys.readouterr().err)
        assert code == 3, line
        assert str(photo) in line
        assert sorted(os.listdir(tmp)) == [name]


@settings(
    max_examples=40,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(cut=st.floats(0.0, 0.999), kind=st.sampled_from(["png", "jpg"]))
def test_truncated_photos_are_always_input_errors(cut, kind, capsys):
    data = good_png() if kind == "png" else good_jpg()
    with tempfile.TemporaryDirectory() as tmp:
        photo = Path(tmp, f"cut.{kind}")
        photo.write_bytes(data[: int(len(data) * cut)])
        code = main(
            [
                "calibrate",
                str(photo),
                "--corners",
                "1,1,9,1,9,9,1,9",
                "--out",
                str(Path(tmp, "cam.toml")),
            ]
        )
        line = _one_clean_line(capsys.readouterr().err)
        assert code == 3 and str(photo) in line


@settings(
    max_examples=30,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(position=st.integers(0, 10_000), value=st.integers(0, 255))
@example(position=1751, value=0)  # once made a gain fit run off to an overflowing gain
def test_damaged_bytes_never_crash(position, value, capsys):
    data = bytearray(good_jpg())
    data[position % len(data)] = value
    with tempfile.TemporaryDirectory() as tmp:
        photo = Path(tmp, "shot.jpg")
        photo.write_bytes(bytes(data))
        code = main(["map", str(photo), *STACK, "--out", str(Path(tmp, "out"))])
        err = capsys.readouterr().err
        assert code in (0, 3, 5), err
        if code:
            _one_clean_line(err)


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return (
            "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf") if math.isinf(v) else repr(v)
        )
    if isinstance(v, int):
        return str(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(k)} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(v)


def _toml(doc: dict) -> str:
    lines = []
    for section, content in doc.items():
        lines.append(f"[{json.dumps(section)}]")
        lines += [f"{json.dumps(k)} = {_toml_value(v)}" for k, v in content.items()]
    return "\n".join(lines) + "\n"


SCALARS = st.one_of(
    st.booleans(),
    st.integers(-5, 3000),
    st.floats(allow_nan=True, allow_infinity=True, width=32),
    st.text(max_size=12),
    st.sampled_from(
        [
            "sio2",
            "si",
            "air",
            "1.5",
            "2+0.1j",
            "cauchy:1.45,0.004",
            "cauchy:x",
            "db:a/b/c",
            "db:../../x",
            "D65",
            "F11",
            "blackbody:3200",
            "blackbody:-4",
            "589",
            "546/10",
            "0/0",
            "cie1964",
            "camera-b",
            "all",
            "rect:0,0,10,10",
            "circle:32,32,20",
            "mask:../../x.png",
            "10,10=200",
            "100±5",
            "0,0:63,63",
            "__import__('os').system('touch X')",
            "self",
        ]
    ),
)
VALUES = st.one_of(
    SCALARS,
    st.lists(SCALARS, max_size=3),
    st.lists(
        st.dictionaries(st.sampled_from(["material", "thickness_nm", "x"]), SCALARS, max_size=3),
        max_size=2,
    ),
)
KEYS = [(s, k) for s, keys in SCHEMA.items() for k in keys]
#: sound values per key, so that about half the recipes drawn work
GOOD = {
    ("stack", "film"): ["sio2", "1.46", "cauchy:1.45,0.004", 1.5],
    ("stack", "substrate"): ["si", 3.9, "air"],
    ("stack", "ambient"): ["air", 1.33],
    ("stack", "layers"): [[{"material": "si3n4", "thickness_nm": 20.0}], ["si3n4:20"]],
    ("stack", "substrate_thickness_nm"): [1e6],
    ("light", "source"): ["D65", "F11", "A", "blackbody:3200"],
    ("light", "angle_deg"): [0, 10.0, 45],
    ("light", "aperture"): [0, 0.1],
    ("camera", "sensor"): ["cie1931", "cie1964", "camera-a"],
    ("camera", "calibration"): ["", "self"],
    ("search", "range_nm"): [[0.0, 800.0], [100, 1200]],
    ("search", "step_nm"): [1, 2.0],
    ("measure", "roi"): ["all", "rect:0,0,40,40", "circle:32,32,20"],
    ("measure", "anchors"): [[], ["10,10=200"]],
    ("measure", "thicker_at"): [[]],
    ("report", "spec"): ["", "250±50"],
    ("report", "scale_px_per_mm"): [10.0],
    ("report", "scale_points"): ["", "0,0:50,0=5"],
    ("report", "edge_exclusion_mm"): [0.0],
    ("report", "sites"): [1, 5],
    ("report", "profiles"): [["0,32:63,32"]],
    ("report", "regions"): [["rect:0,0,20,20"]],
    ("report", "write_report"): [False],
}
assert set(GOOD) == set(KEYS)


def _mostly_good(key):
    good = st.sampled_from(GOOD[key])
    return st.one_of(good, good, good, VALUES)  # three to one for a sound value


EDITS = st.lists(
    st.one_of(
        *[st.sampled_from(KEYS)] * 4,  # now and then a key that does not exist
        st.tuples(st.sampled_from(["stack", "extra"]), st.text(max_size=5)),
    ),
    unique=True,
    max_size=3,
).flatmap(
    lambda keys: st.fixed_dictionaries({k: _mostly_good(k) if k in GOOD else VALUES for k in keys})
)


@settings(
    max_examples=40,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(edits=EDITS)
def test_random_recipes_are_options_errors_or_work(edits, capsys):
    """A recipe is data: whatever it holds, the answer is a result or exit 2 (3 for a
    named file that is missing), never an internal error, and it writes only in --out."""
    doc = {"stack": {"film": "sio2", "substrate": "si"}, "search": {"range_nm": [0.0, 800.0]}}
    for (section, key), value in edits.items():
        if section == "search" and key == "step_nm" and isinstance(value, int | float):
            value = max(abs(value), 0.5) if math.isfinite(value) else value  # keep tables small
        if section == "search" and key == "range_nm" and isinstance(value, list):
            value = [
                min(abs(v), 3000) if isinstance(v, float) and math.isfinite(v) else v for v in value
            ]
        doc.setdefault(section, {})[key] = value
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        work = root / "a" / "b"
        work.mkdir(parents=True)
        (work / "photo.png").write_bytes(good_png())
        (work / "recipe.toml").write_text(_toml(doc), encoding="utf-8")
        before = _tree(root)
        cwd = os.getcwd()
        os.chdir(work)
        try:
            code = main(["map", "photo.png", "--recipe", "recipe.toml", "--out", "out", "-q"])
        finally:
            os.chdir(cwd)
        err = capsys.readouterr().err
        event(f"exit {code}")
        assert code in (0, 2, 3, 5), err
        if code:
            _one_clean_line(err)
        new = set(_tree(root)) - set(before)
        assert all(
            k == os.path.join("a", "b", "out")
            or k.startswith(os.path.join("a", "b", "out") + os.sep)
            for k in new
        ), new
        assert not (work / "X").exists()


# ------------------------------------------------------------------ the documentation


def test_every_exit_code_is_documented():
    text = (ROOT / "docs" / "errors.md").read_text(encoding="utf-8")
    codes = {errors.EXIT_OK, errors.EXIT_INTERNAL, errors.EXIT_INTERRUPTED}
    codes |= {
        cls.exit_code
        for cls in vars(errors).values()
        if isinstance(cls, type) and issubclass(cls, errors.FringemapError)
    }
    table = set(re.findall(r"^\| `(\d+)` \|", text, flags=re.MULTILINE))
    assert {str(c) for c in codes} <= table, sorted({str(c) for c in codes} - table)
    for cls in (
        errors.OptionError,
        errors.InputFileError,
        errors.OutputError,
        errors.MeasurementError,
        errors.BatchFailures,
    ):
        assert cls.__name__ in text


def test_documented_messages_are_what_the_cases_print():
    """Every message fragment quoted in docs/errors.md's tables is one the cases print."""
    if len(OBSERVED) < len(CASES):
        pytest.skip("needs the whole table of cases run first (run this file whole)")
    text = (ROOT / "docs" / "errors.md").read_text(encoding="utf-8")
    quoted = re.findall(r"^\| `([^`]+)` \| (\d) \|", text, flags=re.MULTILINE)
    assert len(quoted) >= 40
    for fragment, code in quoted:
        seen = [line for line, c in OBSERVED.values() if fragment in line]
        assert seen, f"no case prints {fragment!r}"
        assert int(code) in {c for line, c in OBSERVED.values() if fragment in line}, fragment
