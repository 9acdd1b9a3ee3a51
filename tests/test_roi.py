"""Tests of fringemap.roi: parsing regions, their masks and edge exclusion."""

from __future__ import annotations

import math

import cv2
import numpy as np
import pytest

from fringemap.errors import InputFileError, OptionError
from fringemap.roi import (
    CircleRoi,
    FullRoi,
    MaskRoi,
    RectRoi,
    edge_exclusion_mask,
    parse_roi,
    parse_segment,
    parse_xy,
    roi_mask,
)

# ----------------------------------------------------------------------- parsing


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("all", FullRoi()),
        (" ALL ", FullRoi()),
        ("rect:10,20,30,40", RectRoi(10, 20, 30, 40)),
        ("RECT: 10, 20, 30, 40", RectRoi(10, 20, 30, 40)),
        ("10,20,30,40", RectRoi(10, 20, 30, 40)),
        ("rect:-5,-5,3.0,4", RectRoi(-5, -5, 3, 4)),
        ("circle:50,60.5,7.25", CircleRoi(50.0, 60.5, 7.25)),
    ],
)
def test_parse_roi_forms(text, expected):
    # common practice: each documented form gives its region
    assert parse_roi(text) == expected


@pytest.mark.parametrize(
    "text",
    [
        "",
        "box:1,2,3,4",
        "rect:1,2,3",
        "rect:1,2,3,4,5",
        "rect:a,2,3,4",
        "rect:1.5,2,3,4",
        "rect:5,2,3,4",
        "rect:1,4,3,4",
        "rect:nan,2,3,4",
        "1,2,3",
        "circle:1,2",
        "circle:1,2,0",
        "circle:1,2,-3",
        "circle:1,inf,3",
        "mask:",
    ],
)
def test_parse_roi_errors_name_the_option(text):
    # common practice: malformed text is an option error naming --roi, on one line
    with pytest.raises(OptionError) as info:
        parse_roi(text)
    assert info.value.where == "--roi"
    assert info.value.exit_code == 2
    assert "\n" not in str(info.value)
    assert "expected" in info.value.message


def test_str_round_trips():
    # common practice: the text form of a region parses back to the same region
    for roi in (FullRoi(), RectRoi(1, 2, 3, 4), CircleRoi(5.5, 6.0, 7.0)):
        assert parse_roi(str(roi)) == roi


# ------------------------------------------------------------------------- masks


def test_full_mask():
    # independent numpy computation: every pixel
    assert roi_mask(FullRoi(), (4, 6)).all()
    assert roi_mask(FullRoi(), (4, 6)).shape == (4, 6)


def test_rect_mask_inclusive_exclusive():
    # independent numpy computation: columns 2..4 and rows 1..2 are inside
    mask = roi_mask(RectRoi(2, 1, 5, 3), (6, 8))
    expected = np.zeros((6, 8), dtype=bool)
    expected[1:3, 2:5] = True
    np.testing.assert_array_equal(mask, expected)


def test_rect_partly_outside_is_clipped():
    # independent numpy computation: only the part inside the image counts
    mask = roi_mask(RectRoi(-3, -3, 2, 100), (5, 5))
    expected = np.zeros((5, 5), dtype=bool)
    expected[:, :2] = True
    np.testing.assert_array_equal(mask, expected)


def test_circle_area():
    # independent numpy computation: a disc of radius 50 holds about pi * 50**2 pixels (1 %)
    mask = roi_mask(CircleRoi(100, 100, 50), (200, 200))
    assert abs(mask.sum() - math.pi * 50**2) / (math.pi * 50**2) < 0.01
    assert mask[100, 150] and mask[100, 50] and not mask[100, 151]


def test_circle_membership_matches_distance():
    # independent numpy computation: inside exactly when the centre is within R
    mask = roi_mask(CircleRoi(3.5, 2.0, 2.6), (7, 9))
    yy, xx = np.mgrid[0:7, 0:9]
    np.testing.assert_array_equal(mask, np.hypot(xx - 3.5, yy - 2.0) <= 2.6)


@pytest.mark.parametrize(
    "roi",
    [
        RectRoi(20, 0, 30, 5),
        RectRoi(-10, -10, 0, 0),
        CircleRoi(-50, -50, 10),
        CircleRoi(2.5, 2.5, 0.2),
    ],
)
def test_region_without_pixels_is_an_error(roi):
    # common practice: an empty region is refused, naming the option and the image size
    with pytest.raises(OptionError) as info:
        roi_mask(roi, (10, 20))
    assert info.value.where == "--roi"
    assert "20x10" in info.value.message


def test_mask_image(tmp_path):
    # independent numpy computation: nonzero pixels of the file are inside
    image = np.zeros((12, 16), dtype=np.uint8)
    image[2:5, 3:9] = 255
    image[10, 15] = 1
    path = tmp_path / "region.png"
    cv2.imwrite(str(path), image)
    roi = parse_roi(f"mask:{path}")
    assert isinstance(roi, MaskRoi)
    np.testing.assert_array_equal(roi_mask(roi, (12, 16)), image != 0)


def test_mask_image_of_other_size(tmp_path):
    # common practice: a mask must match the image size
    path = tmp_path / "small.png"
    cv2.imwrite(str(path), np.full((4, 4), 255, dtype=np.uint8))
    with pytest.raises(OptionError) as info:
        roi_mask(parse_roi(f"mask:{path}"), (8, 8))
    assert info.value.where == "--roi"
    assert "8x8" in info.value.message and "4x4" in info.value.message


def test_all_zero_mask_image(tmp_path):
    # common practice: a mask with nothing inside is an empty region
    path = tmp_path / "blank.png"
    cv2.imwrite(str(path), np.zeros((4, 5), dtype=np.uint8))
    with pytest.raises(OptionError, match="5x4"):
        roi_mask(parse_roi(f"mask:{path}"), (4, 5))


def test_unreadable_mask(tmp_path):
    # common practice: a file that is not an image is an input-file error naming --roi
    path = tmp_path / "not_an_image.png"
    path.write_text("hello")
    with pytest.raises(InputFileError) as info:
        parse_roi(f"mask:{path}")
    assert info.value.where == "--roi"
    assert info.value.exit_code == 3


# ---------------------------------------------------------------- edge exclusion


def test_edge_exclusion_of_a_disc():
    # independent numpy computation: excluding 10 px of a disc of R = 40 leaves about R = 30
    yy, xx = np.mgrid[0:101, 0:101]
    disc = np.hypot(xx - 50, yy - 50) <= 40
    inner = edge_exclusion_mask(disc, exclusion_px=10)
    assert not (inner & ~disc).any()
    area = inner.sum()
    assert math.pi * 29**2 < area < math.pi * 31.5**2


def test_edge_exclusion_rectangle_exact():
    # independent numpy computation: a 1 px exclusion removes the outer ring of a rectangle
    region = np.zeros((10, 10), dtype=bool)
    region[2:8, 1:9] = True
    kept = edge_exclusion_mask(region, exclusion_px=1)
    expected = np.zeros_like(region)
    expected[3:7, 2:8] = True
    np.testing.assert_array_equal(kept, expected)
    np.testing.assert_array_equal(edge_exclusion_mask(region, exclusion_px=0), region)


def test_edge_exclusion_counts_the_image_border():
    # common practice: beyond the photo nothing is known, so its border is an edge
    kept = edge_exclusion_mask(np.ones((5, 5), dtype=bool), exclusion_px=1)
    expected = np.zeros((5, 5), dtype=bool)
    expected[1:4, 1:4] = True
    np.testing.assert_array_equal(kept, expected)


@pytest.mark.parametrize("value", [-1.0, math.nan, math.inf, 100.0])
def test_edge_exclusion_errors(value):
    # common practice: negative, non-finite or all-consuming exclusions are refused
    with pytest.raises(OptionError) as info:
        edge_exclusion_mask(np.ones((9, 9), dtype=bool), exclusion_px=value)
    assert info.value.where == "--edge-exclusion"


# ----------------------------------------------------------------- point parsing


def test_parse_xy_and_segment():
    # common practice: numbers are read as given
    assert parse_xy(" 12.5, 7 ", "--center") == (12.5, 7.0)
    assert parse_segment("1,2:30.5,4", "--profile") == ((1.0, 2.0), (30.5, 4.0))


@pytest.mark.parametrize("text", ["1", "1,2,3", "a,2", "1,nan", "inf,2", ""])
def test_parse_xy_errors(text):
    # common practice: errors name the option they came from
    with pytest.raises(OptionError) as info:
        parse_xy(text, "--center")
    assert info.value.where == "--center"


@pytest.mark.parametrize("text", ["1,2", "1,2:3", "1,2:3,4:5,6", "1,2:x,4", "1,2;3,4"])
def test_parse_segment_errors(text):
    # common practice: errors name the option they came from
    with pytest.raises(OptionError) as info:
        parse_segment(text, "--profile")
    assert info.value.where == "--profile"
