"""Tests of fringemap.io.photo: reading photo files into linear-light RGB."""

from __future__ import annotations

import hashlib
import io
import struct
import sys
import zlib
from pathlib import Path

import cv2
import numpy as np
import pytest
import tifffile
from PIL import Image, ImageOps

from fringemap.colour.transfer import srgb_decode
from fringemap.errors import InputFileError, OptionError
from fringemap.io import Photo, photo_from_array, read_photo
from fringemap.io import photo as photo_module

# --------------------------------------------------------------------------
# helpers that make test files
# --------------------------------------------------------------------------


def _gradient_u8(height: int = 32, width: int = 48) -> np.ndarray:
    y, x = np.mgrid[0:height, 0:width]
    rgb = np.stack([x * 255 // (width - 1), y * 255 // (height - 1), (x + y) % 256], axis=-1)
    return rgb.astype(np.uint8)


def _random_u16(height: int = 24, width: int = 40, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return rng.integers(256, 65536, (height, width, 3), dtype=np.uint16)


def _cv2_png(path: Path, rgb: np.ndarray) -> Path:
    """Write RGB (or RGBA) with OpenCV, which keeps 16-bit samples."""
    code = cv2.COLOR_RGB2BGR if rgb.shape[2] == 3 else cv2.COLOR_RGBA2BGRA
    ok, buf = cv2.imencode(".png", cv2.cvtColor(rgb, code))
    assert ok
    path.write_bytes(buf.tobytes())
    return path


def _exif_bytes(orientation: int | None = None, **tags: object) -> bytes:
    exif = Image.Exif()
    if orientation is not None:
        exif[0x0112] = orientation
    if "make" in tags:
        exif[0x010F] = tags["make"]
    if "model" in tags:
        exif[0x0110] = tags["model"]
    if "datetime_original" in tags:
        exif.get_ifd(0x8769)[0x9003] = tags["datetime_original"]
    return exif.tobytes()


def _png_chunk(kind: bytes, payload: bytes) -> bytes:
    # PNG chunk layout and CRC-32 over type + data: ISO/IEC 15948 (PNG) section 5.3.
    return (
        struct.pack(">I", len(payload))
        + kind
        + payload
        + struct.pack(">I", zlib.crc32(kind + payload))
    )


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _decode8(rgb: np.ndarray) -> np.ndarray:
    # independent computation: sRGB decode in float64 of code / 255
    return srgb_decode(rgb.astype(np.float64) / 255.0)


# --------------------------------------------------------------------------
# sRGB reference values
# --------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("encoded", "linear"),
    [
        (0.5, 0.214041),  # IEC 61966-2-1 sRGB: mid-grey code
        (0.04045, 0.0031308),  # IEC 61966-2-1 sRGB: the breakpoint
        (1.0, 1.0),  # IEC 61966-2-1 sRGB: white
        (0.0, 0.0),  # IEC 61966-2-1 sRGB: black
    ],
)
def test_srgb_decode_reference_values(encoded, linear):
    assert srgb_decode(np.array([encoded]))[0] == pytest.approx(linear, abs=2e-6)


def test_8bit_white_and_black_decode_to_one_and_zero(tmp_path):
    rgb = np.zeros((8, 8, 3), np.uint8)
    rgb[:4] = 255
    photo = read_photo(_cv2_png(tmp_path / "wb.png", rgb))
    assert np.all(photo.linear[:4] == 1.0)  # IEC 61966-2-1 sRGB: code 255 is white
    assert np.all(photo.linear[4:] == 0.0)


# --------------------------------------------------------------------------
# round trips
# --------------------------------------------------------------------------


def test_png_8bit_round_trip(tmp_path):
    rgb = _gradient_u8()
    photo = read_photo(_cv2_png(tmp_path / "g.png", rgb))
    assert isinstance(photo, Photo)
    assert photo.linear.dtype == np.float32
    assert photo.linear.shape == (32, 48, 3)
    assert photo.shape == (32, 48)
    assert photo.bit_depth == 8
    assert photo.encoding == "srgb"
    assert photo.path == str(tmp_path / "g.png")
    assert photo.metadata["format"] == "png"
    np.testing.assert_allclose(photo.linear, _decode8(rgb), atol=1e-6)


def test_png_channel_order_is_rgb(tmp_path):
    rgb = np.zeros((8, 8, 3), np.uint8)
    rgb[..., 0] = 200  # red only
    photo = read_photo(_cv2_png(tmp_path / "red.png", rgb))
    assert np.all(photo.linear[..., 0] > 0.5)
    assert np.all(photo.linear[..., 1:] == 0.0)


def test_png_16bit_values_survive_exactly(tmp_path):
    rgb = _random_u16()
    assert rgb.max() > 255
    path = _cv2_png(tmp_path / "deep.png", rgb)
    photo = read_photo(path)
    assert photo.bit_depth == 16
    # independent computation: sRGB decode in float64 of code / 65535
    expected = srgb_decode(rgb.astype(np.float64) / 65535.0)
    np.testing.assert_allclose(photo.linear, expected, atol=1e-6, rtol=0)
    # neighbouring 16-bit codes stay distinguishable (not reduced to 8 bits)
    assert len(np.unique(photo.linear)) > 1000


def test_png_16bit_opaque_alpha_is_dropped(tmp_path):
    rgb = _random_u16(16, 16)
    rgba = np.concatenate([rgb, np.full((16, 16, 1), 65535, np.uint16)], axis=-1)
    photo = read_photo(_cv2_png(tmp_path / "rgba.png", rgba))
    np.testing.assert_allclose(photo.linear, srgb_decode(rgb / 65535.0), atol=1e-6)
    assert photo.metadata["alpha_dropped"] is True


def test_palette_png_is_read_as_colour(tmp_path):
    image = Image.new("P", (16, 16))
    image.putpalette([10, 200, 30] * 256)
    path = tmp_path / "palette.png"
    image.save(path)
    photo = read_photo(path)
    np.testing.assert_allclose(photo.linear[0, 0], _decode8(np.array([10, 200, 30])), atol=1e-6)


def test_jpeg_round_trip_within_compression_error(tmp_path):
    rgb = _gradient_u8(64, 64)
    path = tmp_path / "g.jpg"
    Image.fromarray(rgb).save(path, quality=98, subsampling=0)
    photo = read_photo(path)
    assert photo.bit_depth == 8
    assert photo.encoding == "srgb"
    assert photo.metadata["format"] == "jpeg"
    # common practice: quality-98 JPEG of a smooth image is within a few codes
    assert np.max(np.abs(photo.linear - _decode8(rgb))) < 0.05
    assert np.mean(np.abs(photo.linear - _decode8(rgb))) < 0.005


def test_progressive_jpeg(tmp_path):
    rgb = _gradient_u8(40, 56)
    path = tmp_path / "p.jpg"
    Image.fromarray(rgb).save(path, quality=95, progressive=True)
    assert read_photo(path).shape == (40, 56)


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16])
def test_tiff_integer_round_trip(tmp_path, dtype):
    full = np.iinfo(dtype).max
    rgb = (_random_u16(20, 30).astype(np.float64) / 65535 * full).astype(dtype)
    path = tmp_path / "i.tif"
    tifffile.imwrite(path, rgb, photometric="rgb")
    photo = read_photo(path)
    assert photo.bit_depth == np.dtype(dtype).itemsize * 8
    assert photo.encoding == "srgb"
    np.testing.assert_allclose(photo.linear, srgb_decode(rgb / float(full)), atol=1e-6)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_float_tiff_is_linear_and_kept_as_is(tmp_path, dtype):
    rng = np.random.default_rng(3)
    rgb = rng.uniform(-0.01, 1.2, (16, 24, 3)).astype(dtype)
    path = tmp_path / "f.tif"
    tifffile.imwrite(path, rgb, photometric="rgb", compression="zlib")
    photo = read_photo(path)
    assert photo.bit_depth == 32
    assert photo.encoding == "linear"
    np.testing.assert_allclose(photo.linear, rgb.astype(np.float32), rtol=0, atol=0)


def test_float_tiff_can_be_forced_through_srgb_decode(tmp_path):
    rgb = np.full((8, 8, 3), 0.5, np.float32)
    path = tmp_path / "f.tif"
    tifffile.imwrite(path, rgb, photometric="rgb")
    photo = read_photo(path, linearise="srgb")
    assert photo.encoding == "srgb"
    np.testing.assert_allclose(photo.linear, 0.214041, atol=2e-6)  # IEC 61966-2-1 sRGB


def test_linearise_linear_takes_codes_as_linear(tmp_path):
    rgb = _random_u16(8, 8)
    path = tmp_path / "lin.tif"
    tifffile.imwrite(path, rgb, photometric="rgb")
    photo = read_photo(path, linearise="linear")
    assert photo.encoding == "linear"
    np.testing.assert_allclose(photo.linear, rgb / 65535.0, atol=1e-7)


def test_planar_tiff(tmp_path):
    rgb = _random_u16(12, 20)
    path = tmp_path / "planar.tif"
    tifffile.imwrite(path, np.moveaxis(rgb, -1, 0), photometric="rgb", planarconfig="separate")
    photo = read_photo(path)
    np.testing.assert_allclose(photo.linear, srgb_decode(rgb / 65535.0), atol=1e-6)


def test_lzw_tiff(tmp_path):
    # OpenCV writes LZW-compressed TIFF by default (common practice of its TIFF encoder)
    rgb = _random_u16(12, 20)
    path = tmp_path / "lzw.tif"
    assert cv2.imwrite(str(path), cv2.cvtColor(rgb, cv2.COLOR_RGB2BGR))
    photo = read_photo(path)
    np.testing.assert_allclose(photo.linear, srgb_decode(rgb / 65535.0), atol=1e-6)


def test_png_with_jpg_name_is_read_by_content(tmp_path):
    rgb = _random_u16(8, 8)
    path = _cv2_png(tmp_path / "actually_png.jpg", rgb)
    photo = read_photo(path)
    assert photo.metadata["format"] == "png"
    assert photo.metadata["extension_mismatch"] == ".jpg"
    assert photo.bit_depth == 16


def test_read_accepts_pathlike_and_str(tmp_path):
    path = _cv2_png(tmp_path / "a.png", _gradient_u8(8, 8))
    assert read_photo(str(path)).path == read_photo(path).path == str(path)


# --------------------------------------------------------------------------
# orientation and EXIF
# --------------------------------------------------------------------------


def test_jpeg_orientation_6_is_rotated_clockwise(tmp_path):
    stored = np.zeros((32, 48, 3), np.uint8)  # H=32, W=48 as stored
    stored[:16, :16] = (255, 0, 0)  # red block at the stored top-left
    path = tmp_path / "o6.jpg"
    Image.fromarray(stored).save(path, exif=_exif_bytes(6), quality=95, subsampling=0)
    photo = read_photo(path)
    assert photo.orientation_applied == 6
    assert photo.shape == (48, 32)  # EXIF orientation 6: displayed rotated 90 degrees clockwise
    # CIPA DC-008 (EXIF) orientation 6: stored top-left corner shows at the top-right
    top_right = photo.linear[2:14, -14:-2]
    assert top_right[..., 0].min() > 0.8 and top_right[..., 1:].max() < 0.05
    top_left = photo.linear[2:14, 2:14]
    assert top_left.max() < 0.05


@pytest.mark.parametrize("orientation", range(1, 9))
def test_every_orientation_matches_pillow(tmp_path, orientation):
    stored = _gradient_u8(12, 20)
    stored[0, 0] = (255, 255, 255)
    stored[0, 1] = (0, 0, 0)
    path = tmp_path / f"o{orientation}.png"
    Image.fromarray(stored).save(path, exif=_exif_bytes(orientation))
    photo = read_photo(path)
    assert photo.orientation_applied == orientation
    # independent computation: Pillow's own EXIF transpose of the same file
    with Image.open(path) as image:
        upright = np.asarray(ImageOps.exif_transpose(image).convert("RGB"))
    np.testing.assert_allclose(photo.linear, _decode8(upright), atol=1e-6)
    # the saturation mask turns with the picture
    np.testing.assert_array_equal(photo.saturated, np.any(upright >= 252, axis=-1))


def test_exif_fields_are_reported(tmp_path):
    path = tmp_path / "tagged.jpg"
    exif = _exif_bytes(1, make="Acme", model="Acme Z9", datetime_original="2024:05:06 07:08:09")
    Image.fromarray(_gradient_u8()).save(path, exif=exif)
    photo = read_photo(path)
    assert photo.camera == "Acme Z9"
    assert photo.datetime_original == "2024:05:06 07:08:09"


def test_missing_exif_gives_none(tmp_path):
    photo = read_photo(_cv2_png(tmp_path / "plain.png", _gradient_u8()))
    assert photo.camera is None
    assert photo.datetime_original is None
    assert photo.orientation_applied == 1


def test_tiff_orientation_tag_is_applied(tmp_path):
    stored = _random_u16(10, 16)
    path = tmp_path / "o8.tif"
    tifffile.imwrite(path, stored, photometric="rgb", extratags=[(274, "H", 1, 8, True)])
    photo = read_photo(path)
    assert photo.orientation_applied == 8
    assert photo.shape == (16, 10)
    # CIPA DC-008 (EXIF) orientation 8: displayed rotated 90 degrees anticlockwise
    expected = np.rot90(srgb_decode(stored / 65535.0), k=1)
    np.testing.assert_allclose(photo.linear, expected, atol=1e-6)


def test_damaged_exif_does_not_stop_reading(tmp_path):
    path = tmp_path / "badexif.jpg"
    Image.fromarray(_gradient_u8()).save(path, exif=b"Exif\x00\x00II*\x00\xff\xff\xff\x7f garbage")
    photo = read_photo(path)
    assert photo.orientation_applied == 1
    assert "exif_problem" in photo.metadata


# --------------------------------------------------------------------------
# saturation
# --------------------------------------------------------------------------


def test_saturated_mask_8bit_threshold(tmp_path):
    rgb = np.full((8, 8, 3), 100, np.uint8)
    rgb[0, 0, 0] = 251  # 251/255 = 98.43 % < 98.5 %
    rgb[0, 1, 1] = 252  # 252/255 = 98.82 % >= 98.5 %
    rgb[0, 2] = 255
    photo = read_photo(_cv2_png(tmp_path / "s.png", rgb))
    assert photo.saturated.dtype == np.bool_
    assert photo.saturated.shape == (8, 8)
    assert not photo.saturated[0, 0]
    assert photo.saturated[0, 1] and photo.saturated[0, 2]
    assert int(photo.saturated.sum()) == 2


def test_saturated_mask_16bit_threshold(tmp_path):
    rgb = np.full((8, 8, 3), 1000, np.uint16)
    rgb[1, 1, 2] = 64551  # just below 0.985 * 65535 = 64551.975
    rgb[1, 2, 2] = 64552
    photo = read_photo(_cv2_png(tmp_path / "s16.png", rgb))
    assert not photo.saturated[1, 1]
    assert photo.saturated[1, 2]
    assert int(photo.saturated.sum()) == 1


def test_saturated_mask_float_tiff(tmp_path):
    rgb = np.full((8, 8, 3), 0.5, np.float32)
    rgb[2, 2, 0] = 0.984
    rgb[3, 3, 1] = 0.985
    rgb[4, 4, 2] = 3.0
    path = tmp_path / "s.tif"
    tifffile.imwrite(path, rgb, photometric="rgb")
    photo = read_photo(path)
    assert np.argwhere(photo.saturated).tolist() == [[3, 3], [4, 4]]


# --------------------------------------------------------------------------
# bad inputs
# --------------------------------------------------------------------------


def _png_bytes(rgb: np.ndarray) -> bytes:
    ok, buf = cv2.imencode(".png", rgb)
    assert ok
    return buf.tobytes()


def _jpeg_bytes(rgb: np.ndarray, **kw: object) -> bytes:
    out = io.BytesIO()
    Image.fromarray(rgb).save(out, "JPEG", **kw)
    return out.getvalue()


def _make_zero_byte(d: Path) -> Path:
    p = d / "empty.png"
    p.write_bytes(b"")
    return p


def _make_truncated_png(d: Path) -> Path:
    data = _png_bytes(_random_u16(32, 32))
    p = d / "cut.png"
    p.write_bytes(data[: len(data) // 2])
    return p


def _make_truncated_jpeg(d: Path) -> Path:
    data = _jpeg_bytes(_gradient_u8(64, 64))
    p = d / "cut.jpg"
    p.write_bytes(data[: len(data) // 2])
    return p


def _make_text_png(d: Path) -> Path:
    p = d / "notes.png"
    p.write_text("thickness notes\nsample 3, 450 nm\n")
    return p


def _make_missing(d: Path) -> Path:
    return d / "no_such_photo.png"


def _make_folder(d: Path) -> Path:
    p = d / "a_folder.png"
    p.mkdir()
    return p


def _make_gif(d: Path) -> Path:
    p = d / "anim.gif"
    Image.new("RGB", (16, 16), (10, 20, 30)).save(p, "GIF")
    return p


def _make_unknown_binary(d: Path) -> Path:
    p = d / "blob.png"
    p.write_bytes(bytes(range(256)) * 4)
    return p


def _make_grey_png(d: Path) -> Path:
    p = d / "grey.png"
    p.write_bytes(_png_bytes(np.full((16, 16), 128, np.uint8)))
    return p


def _make_grey_alpha_png(d: Path) -> Path:
    p = d / "grey_alpha.png"
    Image.new("LA", (16, 16), (100, 255)).save(p)
    return p


def _make_grey_jpeg(d: Path) -> Path:
    p = d / "grey.jpg"
    Image.new("L", (16, 16), 100).save(p)
    return p


def _make_grey_tiff(d: Path) -> Path:
    p = d / "grey.tif"
    tifffile.imwrite(p, np.zeros((16, 16), np.uint16), photometric="minisblack")
    return p


def _make_tiny(d: Path) -> Path:
    p = d / "tiny.png"
    p.write_bytes(_png_bytes(np.zeros((4, 20, 3), np.uint8)))
    return p


def _make_nan_tiff(d: Path) -> Path:
    rgb = np.full((16, 16, 3), 0.5, np.float32)
    rgb[3, 4, 1] = np.nan
    p = d / "nan.tif"
    tifffile.imwrite(p, rgb, photometric="rgb")
    return p


def _make_inf_tiff(d: Path) -> Path:
    rgb = np.full((16, 16, 3), 0.5, np.float32)
    rgb[3, 4, 1] = np.inf
    p = d / "inf.tif"
    tifffile.imwrite(p, rgb, photometric="rgb")
    return p


def _make_transparent_png(d: Path) -> Path:
    rgba = np.full((16, 16, 4), 255, np.uint8)
    rgba[0, 0, 3] = 0
    rgba[5, 5, 3] = 128
    return _cv2_png(d / "transparent.png", rgba)


def _make_corrupt_dng(d: Path) -> Path:
    p = d / "camera.dng"
    p.write_bytes(b"II*\x00\x08\x00\x00\x00" + bytes(range(200)) * 3)
    return p


def _make_bad_crc_png(d: Path) -> Path:
    data = bytearray(_png_bytes(_random_u16(16, 16)))
    idat = data.find(b"IDAT")
    data[idat + 10] ^= 0xFF
    p = d / "flipped.png"
    p.write_bytes(bytes(data))
    return p


def _make_int16_tiff(d: Path) -> Path:
    p = d / "signed.tif"
    tifffile.imwrite(p, np.zeros((16, 16, 3), np.int16), photometric="rgb")
    return p


def _make_garbage_tiff(d: Path) -> Path:
    p = d / "junk.tif"
    p.write_bytes(b"II*\x00" + b"\xff" * 60)
    return p


BAD_INPUTS = {
    "zero-byte": (_make_zero_byte, "empty"),
    "truncated png": (_make_truncated_png, "truncated"),
    "truncated jpeg": (_make_truncated_jpeg, "truncated"),
    "text named png": (_make_text_png, "text file"),
    "missing": (_make_missing, "does not exist"),
    "folder": (_make_folder, "folder"),
    "gif": (_make_gif, "GIF"),
    "unknown binary": (_make_unknown_binary, "not in a recognised image format"),
    "grey png": (_make_grey_png, "colour (RGB)"),
    "grey+alpha png": (_make_grey_alpha_png, "colour (RGB)"),
    "grey jpeg": (_make_grey_jpeg, "colour (RGB)"),
    "grey tiff": (_make_grey_tiff, "colour (RGB)"),
    "too small": (_make_tiny, "too small"),
    "nan float tiff": (_make_nan_tiff, "NaN"),
    "inf float tiff": (_make_inf_tiff, "infinity"),
    "transparent png": (_make_transparent_png, "transparent"),
    "corrupt dng": (_make_corrupt_dng, "raw"),
    "bad checksum png": (_make_bad_crc_png, "checksum"),
    "int16 tiff": (_make_int16_tiff, "int16"),
    "garbage tiff": (_make_garbage_tiff, "TIFF"),
}


@pytest.mark.parametrize("case", list(BAD_INPUTS))
def test_bad_input_gives_one_line_error_naming_the_file(tmp_path, case):
    make, words = BAD_INPUTS[case]
    path = make(tmp_path)
    with pytest.raises(InputFileError) as info:
        read_photo(path)
    err = info.value
    assert err.exit_code == 3
    assert err.where == str(path)
    assert str(path) in str(err)
    assert "\n" not in str(err) and "\r" not in str(err)
    assert words in err.message


def test_bad_input_messages_are_distinct(tmp_path):
    messages = {}
    for case, (make, _) in BAD_INPUTS.items():
        folder = tmp_path / case.replace(" ", "_").replace("+", "_")
        folder.mkdir()
        with pytest.raises(InputFileError) as info:
            read_photo(make(folder))
        messages[case] = info.value.message
    # cases that are the same problem in different formats may share a message
    same = {"grey png", "grey jpeg", "grey tiff", "grey+alpha png", "nan float tiff"}
    distinct = [m for c, m in messages.items() if c not in same]
    assert len(set(distinct)) == len(distinct)


@pytest.mark.parametrize("fraction", [0.0, 0.1, 0.5, 0.9, 0.999])
def test_truncated_png_at_any_point_is_an_error(tmp_path, fraction):
    data = _png_bytes(_random_u16(32, 32))
    path = tmp_path / "cut.png"
    path.write_bytes(data[: max(1, int(len(data) * fraction))])
    with pytest.raises(InputFileError, match="truncated|corrupt"):
        read_photo(path)


def test_png_missing_only_its_end_chunk_is_an_error(tmp_path):
    data = _png_bytes(_random_u16(16, 16))
    path = tmp_path / "noend.png"
    path.write_bytes(data[:-12])  # the IEND chunk is the last 12 bytes (ISO/IEC 15948)
    with pytest.raises(InputFileError, match="truncated"):
        read_photo(path)


@pytest.mark.parametrize("progressive", [False, True])
@pytest.mark.parametrize("cut", [3, 300, -1000, -2, -1])
def test_truncated_jpeg_at_any_point_is_an_error(tmp_path, progressive, cut):
    data = _jpeg_bytes(_random_u16(48, 64).astype(np.uint8), quality=90, progressive=progressive)
    path = tmp_path / "cut.jpg"
    path.write_bytes(data[:cut])
    with pytest.raises(InputFileError, match="truncated"):
        read_photo(path)


def test_jpeg_with_trailing_bytes_after_end_marker_is_fine(tmp_path):
    data = _jpeg_bytes(_gradient_u8(), quality=95)
    path = tmp_path / "trailer.jpg"
    path.write_bytes(data + b"\xff\xda trailing maker data \x00\x01")
    assert read_photo(path).shape == (32, 48)


def test_unreadable_file(tmp_path, monkeypatch):
    path = _cv2_png(tmp_path / "locked.png", _gradient_u8(8, 8))

    def refuse(*args, **kwargs):
        raise PermissionError(13, "Permission denied")

    # stands in for a file without read permission (the tests may run as root)
    monkeypatch.setattr(photo_module, "open", refuse, raising=False)
    with pytest.raises(InputFileError, match="permission") as info:
        read_photo(path)
    assert info.value.where == str(path)


# --------------------------------------------------------------------------
# decompression-bomb guard
# --------------------------------------------------------------------------


def test_png_claiming_huge_size_is_refused_before_decoding(tmp_path):
    ihdr = struct.pack(">IIBBBBB", 100_000, 100_000, 8, 2, 0, 0, 0)
    idat_header = struct.pack(">I", 5000) + b"IDAT"
    data = (
        b"\x89PNG\r\n\x1a\n"
        + _png_chunk(b"IHDR", ihdr)
        + idat_header
        + zlib.compress(b"\x00" * 1000)[:20]
    )
    path = tmp_path / "bomb.png"
    path.write_bytes(data)
    with pytest.raises(InputFileError, match="too large") as info:
        read_photo(path)
    assert "100000 x 100000" in info.value.message


def test_jpeg_claiming_huge_size_is_refused(tmp_path):
    sof = struct.pack(">BHHB", 8, 60_000, 60_000, 3) + b"\x01\x11\x00\x02\x11\x00\x03\x11\x00"
    data = b"\xff\xd8" + b"\xff\xc0" + struct.pack(">H", len(sof) + 2) + sof + b"\xff\xda"
    path = tmp_path / "bomb.jpg"
    path.write_bytes(data)
    with pytest.raises(InputFileError, match="too large"):
        read_photo(path)


def test_tiff_claiming_huge_size_is_refused(tmp_path):
    # A hand-made little-endian TIFF header (TIFF 6.0 section 2) claiming 100000 x 100000 RGB.
    entries = [
        (256, 4, 1, 100_000),  # ImageWidth, LONG
        (257, 4, 1, 100_000),  # ImageLength
        (258, 3, 1, 8),  # BitsPerSample
        (259, 3, 1, 8),  # Compression: deflate
        (262, 3, 1, 2),  # PhotometricInterpretation: RGB
        (273, 4, 1, 200),  # StripOffsets
        (277, 3, 1, 3),  # SamplesPerPixel
        (278, 4, 1, 100_000),  # RowsPerStrip
        (279, 4, 1, 10),  # StripByteCounts
    ]
    ifd = struct.pack("<H", len(entries))
    for tag, kind, count, value in entries:
        packed = struct.pack("<H", value) + b"\x00\x00" if kind == 3 else struct.pack("<I", value)
        ifd += struct.pack("<HHI", tag, kind, count) + packed
    ifd += struct.pack("<I", 0)
    data = b"II*\x00" + struct.pack("<I", 8) + ifd
    data += b"\x00" * (210 - len(data))
    path = tmp_path / "bomb.tif"
    path.write_bytes(data)
    with pytest.raises(InputFileError, match="too large"):
        read_photo(path)


def test_max_pixels_limit_is_adjustable(tmp_path):
    path = _cv2_png(tmp_path / "a.png", _gradient_u8(16, 16))
    with pytest.raises(InputFileError, match="too large"):
        read_photo(path, max_pixels=255)
    assert read_photo(path, max_pixels=256).shape == (16, 16)


@pytest.mark.parametrize("bad", [0, -5, 1.5, "many", True])
def test_max_pixels_must_be_positive_int(tmp_path, bad):
    path = _cv2_png(tmp_path / "a.png", _gradient_u8(8, 8))
    with pytest.raises(OptionError) as info:
        read_photo(path, max_pixels=bad)
    assert info.value.where == "max_pixels"


def test_linearise_must_be_known(tmp_path):
    path = _cv2_png(tmp_path / "a.png", _gradient_u8(8, 8))
    with pytest.raises(OptionError) as info:
        read_photo(path, linearise="gamma22")
    assert info.value.where == "linearise"


# --------------------------------------------------------------------------
# inputs are never modified
# --------------------------------------------------------------------------


def test_reading_never_modifies_the_file(tmp_path):
    rgb16 = _random_u16(16, 16)
    files = [
        _cv2_png(tmp_path / "a.png", rgb16),
        tmp_path / "b.jpg",
        tmp_path / "c.tif",
        tmp_path / "d.tif",
    ]
    Image.fromarray(_gradient_u8()).save(files[1], exif=_exif_bytes(6))
    tifffile.imwrite(files[2], rgb16, photometric="rgb", extratags=[(274, "H", 1, 3, True)])
    tifffile.imwrite(files[3], rgb16 / 65535.0, photometric="rgb")
    before = {p: (_sha256(p), p.stat().st_mtime_ns) for p in files}
    for p in files:
        read_photo(p)
    after = {p: (_sha256(p), p.stat().st_mtime_ns) for p in files}
    assert before == after


# --------------------------------------------------------------------------
# camera raw
# --------------------------------------------------------------------------


class _FakeSizes:
    def __init__(self, width: int, height: int, flip: int):
        self.width, self.height, self.flip = width, height, flip


class _FakeRaw:
    """Stands in for an opened raw file: returns a fixed developed image."""

    def __init__(self, developed: np.ndarray, flip: int = 0):
        self.developed = developed
        h, w = developed.shape[:2]
        self.sizes = _FakeSizes(
            w if flip not in (5, 6) else h, h if flip not in (5, 6) else w, flip
        )
        self.camera_whitebalance = [2.1, 1.0, 1.6, 0.0]
        self.daylight_whitebalance = [2.0, 1.0, 1.5, 0.0]
        self.black_level_per_channel = [512, 512, 512, 512]
        self.white_level = 16383
        self.color_desc = b"RGBG"
        self.other = None
        self.calls: list[dict] = []

    def postprocess(self, **settings):
        self.calls.append(settings)
        return self.developed


def test_raw_development_settings_and_scaling():
    rawpy = pytest.importorskip("rawpy")
    developed = np.minimum(_random_u16(16, 24), 60000).astype(np.uint16)
    developed[0, 0] = 65535
    fake = _FakeRaw(developed, flip=6)
    photo = photo_module._raw_photo(
        "shot.nef", fake, tags=photo_module._Tags(), max_pixels=10**9, meta={"format": "raw"}
    )
    (settings,) = fake.calls
    assert settings["gamma"] == (1, 1)
    assert settings["no_auto_bright"] is True
    assert settings["output_bps"] == 16
    assert settings["use_camera_wb"] is True
    assert settings["adjust_maximum_thr"] == 0
    assert settings["output_color"] == rawpy.ColorSpace.sRGB
    assert photo.encoding == "linear"
    assert photo.bit_depth == 16
    # linear output: 16-bit code / 65535, no tone curve, no extra rotation
    np.testing.assert_allclose(photo.linear, developed / 65535.0, atol=1e-7, rtol=0)
    assert photo.orientation_applied == 6
    assert photo.saturated[0, 0] and int(photo.saturated.sum()) == 1
    assert photo.metadata["camera_white_balance"] == [2.1, 1.0, 1.6, 0.0]
    assert photo.metadata["white_level"] == 16383.0
    assert photo.metadata["colour_filter"] == "RGBG"


def _write_test_dng(path: Path, orientation: int = 1) -> np.ndarray:
    """A tiny synthetic DNG: 12-bit RGGB mosaic, flat grey with a clipped 8x8 corner.

    Tags follow the Adobe DNG specification 1.4 (DNGVersion, CFA pattern,
    levels, colour matrix, as-shot neutral) and TIFF 6.0 (make, model,
    orientation).
    """
    mosaic = np.full((64, 96), 1000, np.uint16)
    mosaic[:8, :8] = 4095
    identity: list[int] = []
    for i in range(9):
        identity += [10000 if i in (0, 4, 8) else 0, 10000]
    tags = [
        (50706, "B", 4, (1, 4, 0, 0), True),  # DNGVersion
        (50707, "B", 4, (1, 1, 0, 0), True),  # DNGBackwardVersion
        (50708, "s", 0, "Test Camera", True),  # UniqueCameraModel
        (271, "s", 0, "Acme", True),  # Make
        (272, "s", 0, "Acme Q1", True),  # Model
        (274, "H", 1, orientation, True),  # Orientation
        (33421, "H", 2, (2, 2), True),  # CFARepeatPatternDim
        (33422, "B", 4, (0, 1, 1, 2), True),  # CFAPattern: R G / G B
        (50714, "H", 1, 0, True),  # BlackLevel
        (50717, "H", 1, 4095, True),  # WhiteLevel
        (50721, "2i", 9, identity, True),  # ColorMatrix1
        (50778, "H", 1, 21, True),  # CalibrationIlluminant1: D65
        (50728, "2I", 3, [5000, 10000, 10000, 10000, 6000, 10000], True),  # AsShotNeutral
    ]
    tifffile.imwrite(path, mosaic, photometric=32803, extratags=tags, metadata=None)
    return mosaic


def test_synthetic_dng_is_developed_linear(tmp_path):
    pytest.importorskip("rawpy")
    path = tmp_path / "shot.dng"
    _write_test_dng(path)
    photo = read_photo(path)
    assert photo.metadata["format"] == "raw"
    assert photo.encoding == "linear" and photo.bit_depth == 16
    assert photo.shape == (64, 96)
    assert photo.camera == "Acme Q1"
    # as-shot neutral (0.5, 1, 0.6) -> multipliers 1/neutral: Adobe DNG specification 1.4
    np.testing.assert_allclose(
        photo.metadata["camera_white_balance"][:3], [2.0, 1.0, 1 / 0.6], rtol=1e-5
    )
    assert photo.metadata["white_level"] == 4095.0
    assert photo.saturated[:8, :8].all()
    assert not photo.saturated[16:, 16:].any()
    assert 0.0 < float(photo.linear[32, 48, 1]) < 0.9


def test_synthetic_dng_orientation_is_applied_once(tmp_path):
    pytest.importorskip("rawpy")
    path = tmp_path / "turned.dng"
    _write_test_dng(path, orientation=6)
    photo = read_photo(path)
    assert photo.orientation_applied == 6
    assert photo.shape == (96, 64)
    # CIPA DC-008 (EXIF) orientation 6: the stored top-left corner shows at the top-right
    rows, cols = np.nonzero(photo.saturated)
    assert rows.max() < 8 and cols.min() >= 56


def test_raw_without_decoder_installed(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "rawpy", None)  # makes "import rawpy" fail
    path = _make_corrupt_dng(tmp_path)
    with pytest.raises(InputFileError, match=r"fringemap\[raw\]") as info:
        read_photo(path)
    assert info.value.where == str(path)


def test_raw_refuses_srgb_linearisation(tmp_path):
    path = _make_corrupt_dng(tmp_path)
    with pytest.raises(OptionError):
        read_photo(path, linearise="srgb")


# --------------------------------------------------------------------------
# in-memory arrays
# --------------------------------------------------------------------------


def test_photo_from_uint8_srgb():
    rgb = _gradient_u8()
    photo = photo_from_array(rgb, encoding="srgb")
    assert photo.path is None and photo.bit_depth == 8 and photo.encoding == "srgb"
    np.testing.assert_allclose(photo.linear, _decode8(rgb), atol=1e-6)


def test_photo_from_uint16_srgb():
    rgb = _random_u16()
    photo = photo_from_array(rgb, encoding="srgb")
    assert photo.bit_depth == 16
    np.testing.assert_allclose(photo.linear, srgb_decode(rgb / 65535.0), atol=1e-6)


def test_photo_from_float_linear_and_srgb():
    rgb = np.full((8, 8, 3), 0.5)
    assert np.all(photo_from_array(rgb, encoding="linear").linear == np.float32(0.5))
    decoded = photo_from_array(rgb, encoding="srgb").linear
    np.testing.assert_allclose(decoded, 0.214041, atol=2e-6)  # IEC 61966-2-1 sRGB
    assert decoded.dtype == np.float32


@pytest.mark.parametrize(
    "rgb",
    [
        np.zeros((8, 8), np.uint8),
        np.zeros((8, 8, 4), np.uint8),
        np.zeros((8, 8, 3), np.int32),
        np.zeros((4, 8, 3), np.uint8),
        np.full((8, 8, 3), np.nan),
        np.full((8, 8, 3), np.inf, np.float32),
    ],
    ids=["2d", "rgba", "int32", "small", "nan", "inf"],
)
def test_photo_from_array_rejects_bad_arrays(rgb):
    with pytest.raises(OptionError) as info:
        photo_from_array(rgb, encoding="srgb")
    assert info.value.where == "rgb"
    assert "\n" not in str(info.value)


def test_photo_from_array_rejects_unknown_encoding():
    with pytest.raises(OptionError) as info:
        photo_from_array(np.zeros((8, 8, 3), np.uint8), encoding="gamma")
    assert info.value.where == "encoding"


def test_photo_record_checks_its_arrays():
    good = np.zeros((8, 8, 3), np.float32)
    with pytest.raises(OptionError):
        Photo(
            linear=good.astype(np.float64),
            path=None,
            bit_depth=8,
            encoding="srgb",
            saturated=np.zeros((8, 8), bool),
        )
    with pytest.raises(OptionError):
        Photo(
            linear=good, path=None, bit_depth=8, encoding="srgb", saturated=np.zeros((8, 9), bool)
        )


def test_tiff_with_dng_version_tag_goes_to_the_raw_decoder(tmp_path):
    pytest.importorskip("rawpy")
    path = tmp_path / "renamed_dng.tif"
    # DNGVersion tag 50706 (Adobe DNG specification 1.4, chapter 4) marks a raw file
    extratags = [(50706, "B", 4, (1, 4, 0, 0), True)]
    tifffile.imwrite(path, np.zeros((16, 16, 3), np.uint16), photometric="rgb", extratags=extratags)
    with pytest.raises(InputFileError, match="raw") as info:
        read_photo(path)
    assert info.value.where == str(path)


def test_text_file_with_raw_name_is_reported_as_text(tmp_path):
    path = tmp_path / "notes.nef"
    path.write_text("not a raw file\n")
    with pytest.raises(InputFileError, match="text file"):
        read_photo(path)
