"""Tests of fringemap.io.write: atomic output writers and output-path checks."""

from __future__ import annotations

import errno
import json
import os
from pathlib import Path

import cv2
import numpy as np
import pytest
import tifffile

from fringemap.errors import InputFileError, OptionError, OutputError
from fringemap.io import (
    PARTIAL_SUFFIX,
    atomic_path,
    check_no_clash,
    check_output_dir,
    read_photo,
    read_tiff_description,
    write_bytes,
    write_float_tiff,
    write_json,
    write_png,
    write_text,
    write_uint8_tiff,
    write_with,
)
from fringemap.io import write as write_module


def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(PARTIAL_SUFFIX))


def _assert_one_line_naming(err: OutputError, target: Path) -> None:
    assert err.exit_code == 4
    assert err.where == str(target)
    assert str(target) in str(err)
    assert "\n" not in str(err)


# --------------------------------------------------------------------------
# round trips
# --------------------------------------------------------------------------


def test_float_tiff_round_trip_with_description(tmp_path):
    rng = np.random.default_rng(0)
    values = rng.normal(400.0, 50.0, (30, 40)).astype(np.float32)
    values[3, 4] = np.nan
    description = {
        "quantity": "thickness",
        "unit": "nm",
        "scale": np.float64(1.5),
        "count": np.int64(7),
        "missing": float("nan"),
        "shape": (30, 40),
        "note": "résumé",
    }
    target = tmp_path / "thickness.tif"
    assert write_float_tiff(target, values, description=description) == target
    back = tifffile.imread(target)
    assert back.dtype == np.float32
    np.testing.assert_array_equal(back, values)  # NaN positions compare equal here
    with tifffile.TiffFile(target) as tif:
        assert tif.pages.first.compression == tifffile.COMPRESSION.ADOBE_DEFLATE
    # stored as is: read back by tifffile (an independent TIFF reader), the same values,
    # and the TIFF Compression tag says none (TIFF 6.0: 1 = no compression)
    plain = tmp_path / "plain.tif"
    write_float_tiff(plain, values, description=description, compress=False)
    np.testing.assert_array_equal(tifffile.imread(plain), values)
    with tifffile.TiffFile(plain) as tif:
        assert tif.pages.first.compression == tifffile.COMPRESSION.NONE
    assert read_tiff_description(target) == {
        "quantity": "thickness",
        "unit": "nm",
        "scale": 1.5,
        "count": 7,
        "missing": None,
        "shape": [30, 40],
        "note": "résumé",
    }
    assert _leftovers(tmp_path) == []


def test_float_tiff_accepts_float64_and_stores_float32(tmp_path):
    target = tmp_path / "f.tif"
    write_float_tiff(target, np.full((4, 5), 0.1), description={})
    assert tifffile.imread(target).dtype == np.float32


def test_uint8_tiff_round_trip(tmp_path):
    labels = (np.arange(20 * 30) % 256).astype(np.uint8).reshape(20, 30)
    target = tmp_path / "orders.tif"
    write_uint8_tiff(target, labels, description={"kind": "order"})
    np.testing.assert_array_equal(tifffile.imread(target), labels)
    assert read_tiff_description(target) == {"kind": "order"}


@pytest.mark.parametrize(
    ("writer", "array"),
    [
        (write_float_tiff, np.zeros((4, 4, 3), np.float32)),
        (write_float_tiff, np.zeros((4, 4), np.uint8)),
        (write_uint8_tiff, np.zeros((4, 4), np.uint16)),
        (write_uint8_tiff, np.zeros((4, 4), np.float32)),
    ],
)
def test_tiff_writers_check_the_array(tmp_path, writer, array):
    with pytest.raises(OptionError) as info:
        writer(tmp_path / "x.tif", array, description={})
    assert info.value.where == "array"
    assert list(tmp_path.iterdir()) == []


def test_read_tiff_description_of_foreign_tiff(tmp_path):
    target = tmp_path / "other.tif"
    tifffile.imwrite(target, np.zeros((4, 4), np.uint8), description="not json", metadata=None)
    with pytest.raises(InputFileError) as info:
        read_tiff_description(target)
    assert info.value.where == str(target)


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16])
def test_png_round_trip_keeps_rgb_order_and_depth(tmp_path, dtype):
    rng = np.random.default_rng(1)
    rgb = rng.integers(0, np.iinfo(dtype).max, (12, 16, 3), dtype=dtype)
    rgb[0, 0] = (np.iinfo(dtype).max, 0, 0)  # pure red top-left
    target = tmp_path / "preview.png"
    write_png(target, rgb)
    back = cv2.imread(str(target), cv2.IMREAD_UNCHANGED)
    assert back.dtype == dtype
    np.testing.assert_array_equal(back[..., ::-1], rgb)  # OpenCV's channel order is BGR
    assert read_photo(target).bit_depth == np.dtype(dtype).itemsize * 8


def test_png_grey_and_rgba(tmp_path):
    grey = np.arange(64, dtype=np.uint8).reshape(8, 8)
    write_png(tmp_path / "g.png", grey)
    np.testing.assert_array_equal(cv2.imread(str(tmp_path / "g.png"), cv2.IMREAD_UNCHANGED), grey)
    rgba = np.zeros((8, 8, 4), np.uint8)
    rgba[..., 0] = 10
    rgba[..., 3] = 255
    write_png(tmp_path / "a.png", rgba)
    back = cv2.imread(str(tmp_path / "a.png"), cv2.IMREAD_UNCHANGED)
    np.testing.assert_array_equal(cv2.cvtColor(back, cv2.COLOR_BGRA2RGBA), rgba)


@pytest.mark.parametrize(
    "array",
    [np.zeros((4, 4, 3), np.float32), np.zeros((4, 4, 2), np.uint8), np.zeros((0, 4, 3), np.uint8)],
    ids=["float", "two-channel", "empty"],
)
def test_png_writer_checks_the_array(tmp_path, array):
    with pytest.raises(OptionError):
        write_png(tmp_path / "x.png", array)


def test_json_is_indented_with_nan_as_null(tmp_path):
    target = tmp_path / "summary.json"
    obj = {
        "mean_nm": np.float32(412.5),
        "bad": float("nan"),
        "inf": float("-inf"),
        "n": np.int32(3),
        "flag": np.bool_(True),
        "hist": np.array([1.0, np.nan, 2.0]),
        "path": tmp_path / "x.png",
        "pair": (1, 2),
    }
    write_json(target, obj)
    text = target.read_text(encoding="utf-8")
    assert text.endswith("\n")
    assert text.startswith('{\n  "mean_nm": 412.5')  # indent 2
    assert "NaN" not in text and "Infinity" not in text
    assert json.loads(text) == {
        "mean_nm": 412.5,
        "bad": None,
        "inf": None,
        "n": 3,
        "flag": True,
        "hist": [1.0, None, 2.0],
        "path": str(tmp_path / "x.png"),
        "pair": [1, 2],
    }


def test_json_of_unserialisable_object_is_an_output_error(tmp_path):
    target = tmp_path / "bad.json"
    with pytest.raises(OutputError) as info:
        write_json(target, {"f": object()})
    _assert_one_line_naming(info.value, target)
    assert not target.exists()
    assert _leftovers(tmp_path) == []


def test_text_and_bytes_round_trip_and_overwrite(tmp_path):
    target = tmp_path / "table.csv"
    write_text(target, "a,b\r\n1,2\r\n")
    assert target.read_bytes() == b"a,b\r\n1,2\r\n"  # line endings kept as given
    write_text(target, "ü\n")
    assert target.read_text(encoding="utf-8") == "ü\n"
    blob = bytes(range(256)) * 5000  # more than one write chunk
    write_bytes(tmp_path / "blob.bin", blob)
    assert (tmp_path / "blob.bin").read_bytes() == blob
    assert _leftovers(tmp_path) == []


def test_write_text_needs_str(tmp_path):
    with pytest.raises(OptionError):
        write_text(tmp_path / "x.txt", b"bytes")


# --------------------------------------------------------------------------
# atomicity
# --------------------------------------------------------------------------


def _fail_half_way(handle, data):
    """Write half of the data, then fail as a full disk would."""
    view = memoryview(data)
    handle.write(view[: len(view) // 2])
    handle.flush()
    raise OSError(errno.ENOSPC, "No space left on device")


def test_failed_write_leaves_no_partial_file_and_no_target(tmp_path, monkeypatch):
    monkeypatch.setattr(write_module, "_write_chunks", _fail_half_way)
    target = tmp_path / "new.json"
    with pytest.raises(OutputError, match="No space left") as info:
        write_json(target, {"a": list(range(1000))})
    _assert_one_line_naming(info.value, target)
    assert not target.exists()
    assert list(tmp_path.iterdir()) == []


def test_failed_write_leaves_existing_target_unchanged(tmp_path, monkeypatch):
    target = tmp_path / "report.html"
    target.write_text("<p>old</p>")
    monkeypatch.setattr(write_module, "_write_chunks", _fail_half_way)
    with pytest.raises(OutputError):
        write_text(target, "<p>new</p>" * 1000)
    assert target.read_text() == "<p>old</p>"
    assert [p.name for p in tmp_path.iterdir()] == ["report.html"]


def test_failed_tiff_write_half_way(tmp_path, monkeypatch):
    target = tmp_path / "map.tif"
    write_float_tiff(target, np.ones((8, 8), np.float32), description={"v": 1})
    before = target.read_bytes()

    def broken_imwrite(path, *args, **kwargs):
        Path(path).write_bytes(b"II*\x00" + b"\x00" * 100)  # some bytes, then failure
        raise RuntimeError("encoder crashed")

    monkeypatch.setattr(write_module.tifffile, "imwrite", broken_imwrite)
    with pytest.raises(OutputError, match="encoder crashed") as info:
        write_float_tiff(target, np.zeros((8, 8), np.float32), description={"v": 2})
    _assert_one_line_naming(info.value, target)
    assert target.read_bytes() == before
    assert _leftovers(tmp_path) == []


def test_failed_rename_cleans_up(tmp_path, monkeypatch):
    target = tmp_path / "x.bin"

    def no_replace(src, dst):
        raise PermissionError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(write_module.os, "replace", no_replace)
    with pytest.raises(OutputError, match="Permission denied"):
        write_bytes(target, b"data")
    monkeypatch.undo()
    assert list(tmp_path.iterdir()) == []


def test_atomic_path_for_external_writers(tmp_path):
    target = tmp_path / "figure.png"
    seen = []
    with atomic_path(target) as temporary:
        seen.append(temporary)
        assert temporary.parent == tmp_path
        assert temporary.name.startswith(".")
        assert temporary.name.endswith(".partial")
        assert not target.exists()
        temporary.write_bytes(b"picture")
    assert target.read_bytes() == b"picture"
    assert not seen[0].exists()
    assert _leftovers(tmp_path) == []


def test_write_with_calls_the_writer(tmp_path):
    target = tmp_path / "w.txt"
    write_with(target, lambda p: p.write_text("hello"))
    assert target.read_text() == "hello"


def test_atomic_path_error_in_block_keeps_old_target(tmp_path):
    target = tmp_path / "figure.png"
    target.write_bytes(b"old")
    with pytest.raises(OutputError, match="ValueError") as info:
        with atomic_path(target) as temporary:
            temporary.write_bytes(b"half")
            raise ValueError("plotting failed")
    _assert_one_line_naming(info.value, target)
    assert target.read_bytes() == b"old"
    assert _leftovers(tmp_path) == []


def test_atomic_path_block_that_writes_nothing(tmp_path):
    target = tmp_path / "nothing.png"
    with pytest.raises(OutputError, match="no file"):
        with atomic_path(target):
            pass
    assert not target.exists()


def test_atomic_path_interrupt_is_not_converted_but_cleaned(tmp_path):
    target = tmp_path / "x.png"
    with pytest.raises(KeyboardInterrupt):
        with atomic_path(target) as temporary:
            temporary.write_bytes(b"part")
            raise KeyboardInterrupt
    assert list(tmp_path.iterdir()) == []


def test_target_that_is_a_folder(tmp_path):
    target = tmp_path / "taken"
    target.mkdir()
    with pytest.raises(OutputError, match="folder") as info:
        write_bytes(target, b"x")
    _assert_one_line_naming(info.value, target)


def test_target_in_missing_folder(tmp_path):
    target = tmp_path / "nope" / "x.json"
    with pytest.raises(OutputError, match="does not exist") as info:
        write_json(target, {})
    _assert_one_line_naming(info.value, target)


def test_long_target_name(tmp_path):
    target = tmp_path / ("n" * 240 + ".json")
    write_json(target, {"ok": True})
    assert json.loads(target.read_text()) == {"ok": True}


# --------------------------------------------------------------------------
# output folder and clash checks
# --------------------------------------------------------------------------


def test_check_output_dir_creates_nested_folder(tmp_path):
    folder = tmp_path / "a" / "b" / "out"
    assert check_output_dir(folder) == folder
    assert folder.is_dir()
    assert list(folder.iterdir()) == []  # the write probe is removed


def test_check_output_dir_refuses_a_file(tmp_path):
    path = tmp_path / "file.txt"
    path.write_text("x")
    with pytest.raises(OutputError, match="is a file") as info:
        check_output_dir(path)
    _assert_one_line_naming(info.value, path)


def test_check_output_dir_refuses_an_input(tmp_path):
    photo = tmp_path / "photo.png"
    photo.write_bytes(b"x")
    with pytest.raises(OutputError, match="input file"):
        check_output_dir(photo, inputs=[photo])
    with pytest.raises(OutputError, match="input folder"):
        check_output_dir(tmp_path / "." / "sub" / "..", inputs=[tmp_path])
    assert check_output_dir(tmp_path / "out", inputs=[tmp_path, photo]).is_dir()


def test_check_output_dir_not_writable(tmp_path, monkeypatch):
    def refuse(folder):
        raise PermissionError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(write_module, "_probe_writable", refuse)
    with pytest.raises(OutputError, match="not writable") as info:
        check_output_dir(tmp_path)
    _assert_one_line_naming(info.value, tmp_path)


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() == 0, reason="root writes anywhere")
def test_check_output_dir_read_only_folder(tmp_path):
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        with pytest.raises(OutputError, match="not writable"):
            check_output_dir(folder)
    finally:
        folder.chmod(0o700)


def test_check_no_clash_accepts_distinct_paths(tmp_path):
    check_no_clash([tmp_path / "out" / "a.tif"], [tmp_path / "a.jpg"])


def test_check_no_clash_sees_through_spelling_and_links(tmp_path):
    photo = tmp_path / "photo.tif"
    photo.write_bytes(b"x")
    (tmp_path / "sub").mkdir()
    spelled = tmp_path / "sub" / ".." / "photo.tif"
    with pytest.raises(OutputError, match="overwrite the input") as info:
        check_no_clash([spelled], [photo])
    _assert_one_line_naming(info.value, spelled)
    link = tmp_path / "link.tif"
    link.symlink_to(photo)
    with pytest.raises(OutputError):
        check_no_clash([link], [photo])
    hard = tmp_path / "hard.tif"
    os.link(photo, hard)
    with pytest.raises(OutputError, match="same file"):
        check_no_clash([hard], [photo])


def test_check_no_clash_between_outputs(tmp_path):
    out = tmp_path / "a_thickness.tif"
    with pytest.raises(OutputError, match="also the output name"):
        check_no_clash([out, tmp_path / "." / "a_thickness.tif"], [])


def test_nested_writers_and_all_or_nothing_sets(tmp_path):
    import contextlib

    targets = [tmp_path / "a.tif", tmp_path / "b.json"]
    with pytest.raises(OutputError) as info:
        with contextlib.ExitStack() as stack:
            tmp = [stack.enter_context(atomic_path(p)) for p in targets]
            write_float_tiff(tmp[0], np.zeros((4, 4), np.float32), description={})
            write_json(tmp[1], {"f": object()})  # fails: nothing may be left behind
    assert info.value.where == str(targets[1])  # names the real file, not the temporary one
    assert list(tmp_path.iterdir()) == []
    with contextlib.ExitStack() as stack:
        tmp = [stack.enter_context(atomic_path(p)) for p in targets]
        write_float_tiff(tmp[0], np.zeros((4, 4), np.float32), description={"k": 1})
        write_json(tmp[1], {"ok": True})
    assert read_tiff_description(targets[0]) == {"k": 1}
    assert json.loads(targets[1].read_text()) == {"ok": True}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.tif", "b.json"]
