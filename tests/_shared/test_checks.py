"""Numbers the user writes are read strictly, values are shown as numbers, paths said right.

Python's ``float()`` reads ``"4_5"`` as 45 and accepts ``"nan"``, ``"inf"`` and ``"1e3"``
(Python documentation, "Built-in functions: float", common practice); user input goes through
:func:`polarsky._shared.checks.parse_number` instead.
"""

from __future__ import annotations

import os

import pytest

from polarsky._shared.checks import check_distinct_files, number_text, parse_number, path_problem
from polarsky.errors import InputError


@pytest.mark.parametrize("text, value", [
    ("22.5", 22.5), (" -45 ", -45.0), ("\u221245", -45.0), ("+.5", 0.5), ("7.", 7.0),
])
def test_plain_decimals_and_a_unicode_minus_are_read(text, value):
    assert parse_number(text, "--x") == value


@pytest.mark.parametrize("text, match", [
    ("4_5", "no underscores between digits"),          # float("4_5") == 45
    ("nan", "must be a finite number, got nan"),
    ("-Infinity", "must be a finite number, got -infinity"),
    ("1e3", "no exponent"),
    ("22,5", "a decimal point, not a comma"),
    ("", "is empty"),
    ("1.5.5", "not a plain number"),
    ("0x10", "not a plain number"),
])
def test_what_float_would_accept_or_misread_is_refused_naming_the_value(text, match):
    with pytest.raises(InputError, match=match) as info:
        parse_number(text, "--angle-offset")
    assert str(info.value).startswith("--angle-offset")


def test_exponents_where_allowed_and_numbers_beyond_float():
    assert parse_number("1.5e-3", "--x", allow_exponent=True) == 0.0015
    with pytest.raises(InputError, match="1e400 is too large"):
        parse_number("1e400", "--x", allow_exponent=True)
    with pytest.raises(InputError, match="too large"):
        parse_number("9" * 400, "--x")


def test_a_decimal_comma_in_a_field_of_its_own_unless_it_could_separate_thousands():
    assert parse_number("22,5", "angle_deg", decimal_comma=True) == 22.5
    assert parse_number("\u22120,25", "angle_deg", decimal_comma=True) == -0.25
    with pytest.raises(InputError, match="reads two ways"):
        parse_number("1,350", "angle_deg", decimal_comma=True)


def test_numbers_are_shown_as_numbers():
    assert [number_text(v) for v in (1.0, "1", "-0.50", 1e-7, "abc")] == ["1", "1", "-0.5", "1e-07", "'abc'"]


def test_a_looping_link_exists_but_leads_nowhere(tmp_path):
    (tmp_path / "a").symlink_to("b")
    (tmp_path / "b").symlink_to("a")
    (tmp_path / "dangling").symlink_to("gone.png")
    assert path_problem(tmp_path / "a").startswith("is a symbolic link that loops")
    assert path_problem(tmp_path / "a" / "x.png") == "lies below a symbolic link that loops"
    assert path_problem(tmp_path / "dangling") == "is a symbolic link to 'gone.png', which does not exist"
    assert path_problem(tmp_path / "none") == "does not exist"
    assert path_problem(tmp_path) is None


def test_one_file_cannot_be_two_frames_under_any_name(tmp_path):
    f = tmp_path / "f_000deg.png"
    f.write_bytes(b"x")
    os.link(f, tmp_path / "g.png")
    (tmp_path / "h.png").symlink_to(f.name)
    check_distinct_files([f, tmp_path / "other.png"], [0, 45])
    with pytest.raises(InputError, match="f_000deg.png is listed twice, at 0 and 45 deg"):
        check_distinct_files([f, f, f], [0, 45, 90])
    for other in ("g.png", "h.png"):
        with pytest.raises(InputError, match=f"listed twice \\(as f_000deg.png and {other}\\)"):
            check_distinct_files([f, tmp_path / other], [0, 90])
