"""Option syntax: angle lists, number lists and times, the same in every command and file."""

from __future__ import annotations

import pytest

from polarsky.errors import InputError
from polarsky.options.syntax import format_angle_list, parse_angle_list, parse_number_list, parse_when


@pytest.mark.parametrize("text, expect", [
    ("0,45,90,135", (0.0, 45.0, 90.0, 135.0)),
    ("0:180:45", (0.0, 45.0, 90.0, 135.0)),
    ("0:90:30, 135", (0.0, 30.0, 60.0, 135.0)),
    ("0:180:10", tuple(float(a) for a in range(0, 180, 10))),
    ([0, 60, 120], (0.0, 60.0, 120.0)),
])
def test_angle_lists_and_ranges(text, expect):
    assert parse_angle_list(text) == pytest.approx(expect)
    assert isinstance(parse_angle_list(text), tuple)


@pytest.mark.parametrize("text, match", [
    ("0,x,90", "--angles"),
    ("0,,90", "empty item"),
    ("0:180", "not a range"),
    ("0:180:0", "step above 0"),
    ("0:100000:1", "more than 10000"),
])
def test_bad_angle_lists(text, match):
    with pytest.raises(InputError, match=match):
        parse_angle_list(text)


def test_what_summary_csv_writes_can_be_pasted_back():
    angles = (0.0, 22.5, 45.0, 135.0)
    assert parse_angle_list(format_angle_list(angles)) == angles


def test_number_lists():
    assert parse_number_list("1024.5, 768", "--circle-center-px", 2) == (1024.5, 768.0)
    with pytest.raises(InputError, match="--distortion .a. is not a plain number"):
        parse_number_list("a,b", "--distortion")
    with pytest.raises(InputError, match="must hold 2 numbers"):
        parse_number_list("1,2,3", "--circle-center-px", 2)


def test_times_need_a_utc_offset():
    assert parse_when("2024-06-21T12:00:00Z").utcoffset().total_seconds() == 0
    with pytest.raises(InputError, match="no UTC offset"):
        parse_when("2024-06-21T17:30:00")
    with pytest.raises(InputError, match="not an ISO 8601"):
        parse_when("21/06/2024")
