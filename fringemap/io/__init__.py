"""Input and output: photos in, atomically written result files out.

:func:`read_photo` turns a PNG, JPEG, TIFF or camera raw file into a
:class:`Photo` holding linear-light float32 RGB ``(H, W, 3)``;
:func:`photo_from_array` does the same for an array already in memory. The
writers in :mod:`fringemap.io.write` never leave a half-written file behind.
"""

from fringemap.io.photo import (
    MIN_SIDE,
    RAW_EXTENSIONS,
    SATURATION_LEVEL,
    Photo,
    photo_from_array,
    read_photo,
)
from fringemap.io.write import (
    PARTIAL_SUFFIX,
    atomic_path,
    check_no_clash,
    check_output_dir,
    read_tiff_description,
    to_jsonable,
    write_bytes,
    write_float_tiff,
    write_json,
    write_png,
    write_text,
    write_uint8_tiff,
    write_with,
)

__all__ = [
    "Photo",
    "read_photo",
    "photo_from_array",
    "RAW_EXTENSIONS",
    "SATURATION_LEVEL",
    "MIN_SIDE",
    "atomic_path",
    "write_bytes",
    "write_text",
    "write_json",
    "write_float_tiff",
    "write_uint8_tiff",
    "write_png",
    "write_with",
    "read_tiff_description",
    "to_jsonable",
    "check_output_dir",
    "check_no_clash",
    "PARTIAL_SUFFIX",
]
