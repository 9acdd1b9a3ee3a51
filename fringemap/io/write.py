"""Atomic output writers.

Every writer here writes to a hidden temporary file in the target's own folder
(``.<name>.<token>.partial``), flushes it to disk, and only then renames it
over the target with :func:`os.replace`. A reader therefore sees either the
old file or the complete new one, never a half-written file; and when anything
goes wrong the temporary file is removed, the target is left as it was, and
one :class:`~fringemap.errors.OutputError` naming the target is raised.
"""

from __future__ import annotations

import json
import math
import os
import secrets
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import cv2
import numpy as np
import tifffile

from fringemap import __version__
from fringemap.errors import FringemapError, InputFileError, OptionError, OutputError

__all__ = [
    "atomic_path",
    "write_bytes",
    "write_text",
    "write_json",
    "write_float_tiff",
    "write_uint8_tiff",
    "write_png",
    "read_tiff_description",
    "to_jsonable",
    "check_output_dir",
    "check_no_clash",
    "write_with",
    "PARTIAL_SUFFIX",
]

#: Ending of the temporary files the writers create next to their targets.
PARTIAL_SUFFIX = ".partial"

_CHUNK = 1 << 20  # bytes written per call
_MAX_NAME = 180  # characters of the target name kept in the temporary name


def _one_line(text: object) -> str:
    return " ".join(str(text).split())


def _describe(exc: BaseException) -> str:
    if isinstance(exc, OSError) and exc.strerror:
        return _one_line(exc.strerror)
    text = _one_line(exc)
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def _partial_name(target: Path) -> Path:
    """Hidden, unique temporary path in the target's folder."""
    token = f"{os.getpid()}-{secrets.token_hex(4)}"
    return target.with_name(f".{target.name[:_MAX_NAME]}.{token}{PARTIAL_SUFFIX}")


def _remove_quietly(path: Path) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass  # already gone, or nothing more can be done: the original error matters


def _fsync_file(path: Path) -> None:
    with open(path, "rb+") as handle:
        os.fsync(handle.fileno())


def _fsync_dir(folder: Path) -> None:
    """Make the rename durable (POSIX); silently skipped where unsupported."""
    if os.name != "posix":
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


@contextmanager
def atomic_path(path: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield a temporary path to write; rename it to ``path`` when the block succeeds.

    The temporary file sits in the same folder as ``path`` and its name
    starts with ``.`` and ends with ``.partial``. Writers that pick a format
    from the file name must be told the format explicitly, e.g.
    ``fig.savefig(tmp, format="png")``.

    Parameters
    ----------
    path : str or path-like
        The final file name.

    Yields
    ------
    pathlib.Path
        Where the block must write the complete file.

    Raises
    ------
    OutputError
        If the block raises, writes nothing, or the file cannot be flushed or
        renamed. The temporary file is removed and an existing ``path`` is left
        unchanged. Errors that are already fringemap errors (e.g. the
        ``OutputError`` of a writer used on the temporary path; one that named
        the temporary file is made to name ``path``), ``KeyboardInterrupt`` and
        other non-``Exception`` errors are re-raised after the clean-up.

    Notes
    -----
    Several ``atomic_path`` blocks can be held open together (e.g. with
    :class:`contextlib.ExitStack`) to write a set of files all or nothing,
    as far as the renames at the end allow.
    """
    target = Path(os.fspath(path))
    where = str(target)
    if target.is_dir():
        raise OutputError(
            "is a folder; choose a file name for this output, or remove the folder",
            where=where,
        )
    folder = target.parent
    if not folder.is_dir():
        raise OutputError(
            f"cannot be written: its folder {str(folder)!r} does not exist; create it first",
            where=where,
        )
    temporary = _partial_name(target)
    try:
        yield temporary
        if not temporary.exists():
            raise OutputError("was not written: the writer produced no file", where=where)
        _fsync_file(temporary)
        os.replace(temporary, target)
    except FringemapError as exc:
        # Already a one-line user-facing error, e.g. from a writer of this module
        # used on the temporary path: clean up, name the real target instead of
        # the temporary file, and let it through.
        _remove_quietly(temporary)
        if exc.where == str(temporary):
            exc.where = where
        raise
    except Exception as exc:
        _remove_quietly(temporary)
        hint = "; check free space and permissions" if isinstance(exc, OSError) else ""
        raise OutputError(f"cannot be written ({_describe(exc)}){hint}", where=where) from exc
    except BaseException:
        _remove_quietly(temporary)
        raise
    _fsync_dir(folder)


def _write_chunks(handle: Any, data: bytes | memoryview) -> None:
    """Write ``data`` to an open binary file in pieces of at most 1 MiB."""
    view = memoryview(data)
    for start in range(0, len(view), _CHUNK):
        handle.write(view[start : start + _CHUNK])


def _write_file(temporary: Path, data: bytes | memoryview) -> None:
    with open(temporary, "xb") as handle:
        _write_chunks(handle, data)
        handle.flush()


def write_bytes(path: str | os.PathLike[str], data: bytes | bytearray | memoryview) -> Path:
    """Atomically write raw bytes to ``path``.

    Returns
    -------
    pathlib.Path
        The path written.
    """
    with atomic_path(path) as temporary:
        _write_file(temporary, data)
    return Path(os.fspath(path))


def write_text(path: str | os.PathLike[str], text: str, *, encoding: str = "utf-8") -> Path:
    """Atomically write text (CSV, HTML, Markdown...) to ``path``.

    Line endings are written exactly as they appear in ``text``.
    """
    if not isinstance(text, str):
        raise OptionError(f"text must be a str, got {type(text).__name__}", where="text")
    return write_bytes(path, text.encode(encoding))


def to_jsonable(obj: Any) -> Any:
    """Convert ``obj`` to plain JSON types.

    NaN and infinite floats become None (JSON ``null``); numpy scalars and
    arrays become Python numbers and lists; tuples and sets become lists
    (sets sorted); paths become strings; mapping keys become strings.

    Raises
    ------
    TypeError
        For objects with no JSON form.
    """
    if obj is None or isinstance(obj, bool | str):
        return obj
    if isinstance(obj, int):
        return obj
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, np.generic):
        return to_jsonable(obj.item())
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, set | frozenset):
        return [to_jsonable(v) for v in sorted(obj, key=repr)]
    if isinstance(obj, os.PathLike):
        return os.fspath(obj)
    raise TypeError(f"object of type {type(obj).__name__} has no JSON form")


def _json_text(obj: Any, *, indent: int | None, ascii_only: bool) -> str:
    return json.dumps(to_jsonable(obj), indent=indent, allow_nan=False, ensure_ascii=ascii_only)


def write_json(path: str | os.PathLike[str], obj: Any) -> Path:
    """Atomically write ``obj`` as JSON (indent 2, UTF-8, final newline).

    NaN/infinite floats are written as ``null`` and numpy values as plain
    numbers (see :func:`to_jsonable`).
    """
    where = os.fspath(path)
    try:
        text = _json_text(obj, indent=2, ascii_only=False) + "\n"
    except (TypeError, ValueError) as exc:
        raise OutputError(f"cannot be written as JSON ({_one_line(exc)})", where=where) from exc
    return write_bytes(path, text.encode("utf-8"))


def _check_image(array: Any, *, name: str, ndims: tuple[int, ...], kinds: str) -> np.ndarray:
    values = np.asarray(array)
    if values.ndim not in ndims:
        raise OptionError(
            f"{name} must have {' or '.join(str(n) for n in ndims)} dimensions, got shape "
            f"{values.shape}",
            where=name,
        )
    if values.dtype.kind not in kinds:
        raise OptionError(f"{name} has unsupported dtype {values.dtype}", where=name)
    if values.size == 0:
        raise OptionError(f"{name} is empty (shape {values.shape})", where=name)
    return values


def _tiff_description(description: Any, where: str) -> str:
    if not isinstance(description, dict):
        raise OptionError(
            f"description must be a dict, got {type(description).__name__}", where="description"
        )
    try:
        return _json_text(description, indent=None, ascii_only=True)
    except (TypeError, ValueError) as exc:
        raise OutputError(
            f"cannot be written: its description has no JSON form ({_one_line(exc)})", where=where
        ) from exc


def _write_tiff(
    path: str | os.PathLike[str], values: np.ndarray, description: dict, *, compress: bool = True
) -> Path:
    where = os.fspath(path)
    text = _tiff_description(description, where)
    # deflate at its fastest level (imagecodecs' encoder): level 6 costs seconds per
    # 12-megapixel map. No predictor: any TIFF reader with deflate opens the files
    packing = {"compression": "zlib", "compressionargs": {"level": 1}} if compress else {}
    with atomic_path(path) as temporary:
        tifffile.imwrite(
            temporary,
            values,
            **packing,
            maxworkers=2,
            description=text,
            metadata=None,
            software=f"fringemap {__version__}",
            photometric="minisblack",
        )
    return Path(where)


def write_float_tiff(
    path: str | os.PathLike[str], array: np.ndarray, *, description: dict, compress: bool = True
) -> Path:
    """Atomically write a 2-D float32 map (e.g. thickness, nm) as a TIFF.

    Parameters
    ----------
    path : str or path-like
        Target file.
    array : numpy.ndarray, shape (H, W)
        Any floating dtype; stored as float32. NaN is allowed (unmeasured
        pixels).
    description : dict
        Stored as a JSON string in the ImageDescription tag; read it back with
        :func:`read_tiff_description`. NaN values become ``null``.
    compress : bool
        Deflate-compress the file (default). A map of measured float values
        (noise in every last bit) shrinks by only about a quarter for several
        tenths of a second per 12 megapixels: the pipeline's thickness map is
        stored uncompressed; maps in coarse steps (confidence) shrink severalfold.
    """
    values = _check_image(array, name="array", ndims=(2,), kinds="f")
    return _write_tiff(
        path, np.ascontiguousarray(values, dtype=np.float32), description, compress=compress
    )


def write_uint8_tiff(path: str | os.PathLike[str], array: np.ndarray, *, description: dict) -> Path:
    """Atomically write a 2-D uint8 image (mask, labels, order map) as a compressed TIFF.

    Parameters
    ----------
    path : str or path-like
        Target file.
    array : numpy.ndarray, shape (H, W), uint8
        Values to store (convert bool masks with ``.astype(np.uint8)``).
    description : dict
        Stored as JSON in the ImageDescription tag.
    """
    values = _check_image(array, name="array", ndims=(2,), kinds="u")
    if values.dtype != np.uint8:
        raise OptionError(f"array must be uint8, got {values.dtype}", where="array")
    return _write_tiff(path, np.ascontiguousarray(values), description)


def read_tiff_description(path: str | os.PathLike[str]) -> dict:
    """Read back the JSON description written by the TIFF writers here.

    Returns
    -------
    dict
        The description (``null`` values come back as None).

    Raises
    ------
    fringemap.errors.InputFileError
        If the file cannot be read or holds no JSON description.
    """
    where = os.fspath(path)
    try:
        with tifffile.TiffFile(where) as tif:
            text = tif.pages.first.description
    except FileNotFoundError as exc:
        raise InputFileError("does not exist; check the file name", where=where) from exc
    except Exception as exc:
        raise InputFileError(f"cannot be read as TIFF ({_describe(exc)})", where=where) from exc
    try:
        value = json.loads(text)
    except ValueError as exc:
        raise InputFileError(
            "has no JSON description; it was not written by fringemap", where=where
        ) from exc
    if not isinstance(value, dict):
        raise InputFileError(
            "has a description that is not a JSON object; it was not written by fringemap",
            where=where,
        )
    return value


def write_png(path: str | os.PathLike[str], rgb: np.ndarray) -> Path:
    """Atomically write an 8- or 16-bit PNG.

    Parameters
    ----------
    path : str or path-like
        Target file.
    rgb : numpy.ndarray, uint8 or uint16
        Shape ``(H, W, 3)`` RGB, ``(H, W, 4)`` RGBA or ``(H, W)`` grey.
    """
    values = _check_image(rgb, name="rgb", ndims=(2, 3), kinds="u")
    if values.dtype not in (np.dtype(np.uint8), np.dtype(np.uint16)):
        raise OptionError(f"rgb must be uint8 or uint16, got {values.dtype}", where="rgb")
    if values.ndim == 3 and values.shape[2] not in (3, 4):
        raise OptionError(
            f"rgb must have 3 (RGB) or 4 (RGBA) channels, got shape {values.shape}", where="rgb"
        )
    if values.ndim == 3:
        code = cv2.COLOR_RGB2BGR if values.shape[2] == 3 else cv2.COLOR_RGBA2BGRA
        values = cv2.cvtColor(np.ascontiguousarray(values), code)
    where = os.fspath(path)
    ok, encoded = cv2.imencode(".png", np.ascontiguousarray(values))
    if not ok:
        raise OutputError("cannot be written: PNG encoding failed", where=where)
    return write_bytes(path, encoded.tobytes())


def _probe_writable(folder: Path) -> None:
    probe = folder / f".fringemap-probe-{os.getpid()}-{secrets.token_hex(4)}{PARTIAL_SUFFIX}"
    with open(probe, "xb") as handle:
        handle.write(b"ok")
    os.unlink(probe)


def _real(path: str | os.PathLike[str]) -> str:
    return os.path.normcase(os.path.realpath(os.fspath(path)))


def check_output_dir(
    path: str | os.PathLike[str], *, inputs: Iterable[str | os.PathLike[str]] = ()
) -> Path:
    """Make sure ``path`` is a folder fringemap can write into, creating it if needed.

    Parameters
    ----------
    path : str or path-like
        The output folder.
    inputs : iterable of path-like
        Input photos or input folders. The output folder must not be one of
        the input files, nor the same folder as an input folder (results
        would later be mistaken for photos).

    Returns
    -------
    pathlib.Path
        The folder.

    Raises
    ------
    OutputError
        If the folder cannot be created, is a file, equals an input, or is
        not writable (checked by creating and removing a small hidden file).
    """
    folder = Path(os.fspath(path))
    where = str(folder)
    real = _real(folder)
    for item in inputs:
        if _real(item) == real:
            kind = "input folder" if os.path.isdir(item) else "input file"
            raise OutputError(
                f"is also an {kind} ({os.fspath(item)}); choose a separate output folder",
                where=where,
            )
    if folder.exists() and not folder.is_dir():
        raise OutputError("is a file, not a folder; choose an output folder", where=where)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(
            f"cannot be created ({_describe(exc)}); choose another output folder", where=where
        ) from exc
    try:
        _probe_writable(folder)
    except OSError as exc:
        raise OutputError(
            f"is not writable ({_describe(exc)}); choose another output folder or fix its "
            "permissions",
            where=where,
        ) from exc
    return folder


def _identity(path: str) -> tuple[int, int] | None:
    try:
        info = os.stat(path)
    except OSError:
        return None
    return (info.st_dev, info.st_ino)


def check_no_clash(
    output_paths: Iterable[str | os.PathLike[str]],
    input_paths: Iterable[str | os.PathLike[str]],
) -> None:
    """Refuse output names that would overwrite an input or each other.

    Paths are compared after resolving symbolic links and ``..`` (and case on
    case-insensitive systems); existing files are also compared by identity,
    which catches hard links.

    Raises
    ------
    OutputError
        Naming the first clashing output.
    """
    inputs = [os.fspath(p) for p in input_paths]
    input_real = {_real(p): p for p in inputs}
    input_ids: dict[tuple[int, int], str] = {}
    for p in inputs:
        ident = _identity(p)
        if ident is not None:
            input_ids[ident] = p
    seen: dict[str, str] = {}
    for out in (os.fspath(p) for p in output_paths):
        real = _real(out)
        if real in input_real:
            raise OutputError(
                f"would overwrite the input {input_real[real]}; choose another output folder or "
                "name",
                where=out,
            )
        ident = _identity(out)
        if ident is not None and ident in input_ids:
            raise OutputError(
                f"is the same file as the input {input_ids[ident]} (a link); choose another "
                "output folder or name",
                where=out,
            )
        if real in seen:
            raise OutputError(
                f"is also the output name for {seen[real]}; give the inputs distinct names or "
                "separate output folders",
                where=out,
            )
        seen[real] = out


def write_with(path: str | os.PathLike[str], writer: Callable[[Path], Any]) -> Path:
    """Atomically create ``path`` by calling ``writer(temporary_path)``."""
    with atomic_path(path) as temporary:
        writer(temporary)
    return Path(os.fspath(path))
