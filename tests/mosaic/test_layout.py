"""Mosaic layout strings, colour patterns and frame-size checks (bad input -> InputError)."""

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.mosaic.layout import check_frame_shape, parse_mosaic


def test_parse_layout_row_major():
    lay = parse_mosaic(" 90, 45 ; 135,0 ")
    assert lay.angles_deg == (90.0, 45.0, 135.0, 0.0)
    assert lay.text == "90,45;135,0"
    assert lay.cell == 2 and lay.channels == ["L"]
    np.testing.assert_array_equal(lay.grid, [[90, 45], [135, 0]])


def test_parse_any_arrangement_and_colour():
    lay = parse_mosaic("0,45;135,90", "rggb")
    assert lay.colour == "RGGB" and lay.cell == 4 and lay.channels == ["R", "G", "B"]
    assert parse_mosaic([[10, 55], [100, 145]]).angles_deg == (10.0, 55.0, 100.0, 145.0)


@pytest.mark.parametrize("text, match", [
    ("90,45,135,0", "not a 2x2 cell"),
    ("90,45;135", "not a 2x2 cell"),
    ("90,45;135,0;10,20", "not a 2x2 cell"),
    ("90,45;135,x", "not a list of numbers"),
    ("90,45;135,45", "four distinct orientations"),
    ("0,45;90,180", "four distinct orientations"),   # 180 == 0 modulo 180
    ("nan,45;90,135", "non-finite"),
])
def test_bad_mosaic_strings(text, match):
    with pytest.raises(InputError, match=match):
        parse_mosaic(text)


def test_bad_colour_order():
    with pytest.raises(InputError, match="not a Bayer order; give one of RGGB"):
        parse_mosaic("90,45;135,0", "RGBG")


@pytest.mark.parametrize("shape, colour", [((47, 64), None), ((48, 63), None), ((50, 64), "RGGB"), ((48, 62), "BGGR")])
def test_frame_not_multiple_of_cell(shape, colour):
    lay = parse_mosaic("90,45;135,0", colour)
    with pytest.raises(InputError, match=f"not a multiple of the {lay.cell}x{lay.cell}"):
        check_frame_shape(shape, lay)


@pytest.mark.parametrize("shape, colour, need", [((2, 2), None, "4x4"), ((2, 8), None, "4x4"), ((4, 8), "RGGB", "8x8")])
def test_a_frame_of_whole_cells_too_small_to_decode_is_said_so(shape, colour, need):
    # a 2x2 frame is a multiple of the 2x2 cell: the fault is its size, not its alignment
    with pytest.raises(InputError, match=f"too small to decode: .* needs at least {need} pixels") as info:
        check_frame_shape(shape, parse_mosaic("90,45;135,0", colour))
    assert "not a multiple" not in str(info.value)


def test_frame_must_be_2d():
    with pytest.raises(InputError, match="single-channel"):
        check_frame_shape((48, 64, 3), parse_mosaic("90,45;135,0"))
