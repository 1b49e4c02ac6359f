"""Regions: a pixel box or a mask image, read one way for --region, --protect and --sky-mask."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.read.masks import parse_region


def test_box_forms():
    assert parse_region([0, 1, 2, 3]).box == (0, 1, 2, 3)
    r = parse_region(" 0, 1 ,2,3", option="--protect")
    assert r.box == (0, 1, 2, 3) and r.text == "0,1,2,3" and r.option == "--protect"
    m = parse_region("1,2,4,3").as_mask((5, 6))
    assert m.sum() == 3 and m[2, 1:4].all()


@pytest.mark.parametrize("value, match", [
    ("a,b,c,d", "neither a box"),
    ([0, 1, 2], "four whole numbers"),
    ([0, 1, 2.5, 3], "four whole numbers"),
    ("missing.png", "neither a box"),
])
def test_bad_regions_are_named(value, match):
    with pytest.raises(InputError, match=match):
        parse_region(value, option="--region")


def test_box_that_does_not_fit_the_frame():
    with pytest.raises(InputError, match="--region 0,0,99,4 does not fit in the 8x6 frame"):
        parse_region("0,0,99,4").as_mask((6, 8))


@pytest.mark.parametrize("box", ["5,5,2,9", "-1,0,3,3", "2,3,2,5"])
def test_a_box_that_is_not_a_box_is_refused_when_given(box):
    with pytest.raises(InputError, match=f"--region {box} is not a box"):
        parse_region(box)


def test_mask_image_relative_to_a_settings_file_and_of_the_frame_size(tmp_path):
    import cv2

    m = np.zeros((6, 8), np.uint8)
    m[1:3, 2:5] = 255
    cv2.imwrite(str(tmp_path / "mask.png"), m)
    r = parse_region("mask.png", option="--sky-mask", base=tmp_path)
    assert r.path == tmp_path / "mask.png"
    assert r.as_mask((6, 8)).sum() == 6
    with pytest.raises(InputError, match="is 8x6 but the frames are 10x6"):
        r.as_mask((6, 10))
    cv2.imwrite(str(tmp_path / "empty.png"), np.zeros((6, 8), np.uint8))
    with pytest.raises(InputError, match="no non-zero pixels"):
        parse_region(str(tmp_path / "empty.png")).as_mask((6, 8))
