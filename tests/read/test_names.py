"""Analyzer angles written in file names: one parser for every command and the batch."""

from __future__ import annotations

import pytest

from polarsky.errors import InputError
from polarsky.read.names import angle_from_name, split_name


def test_angle_tokens():
    assert angle_from_name("pier_045deg.tif") == 45.0
    assert angle_from_name("a_22.5deg.png") == 22.5
    assert angle_from_name("no_angle.png") is None


def test_signed_tokens_and_separators():
    assert angle_from_name("pier_-45deg.png") == -45.0
    assert angle_from_name("pier-45deg.png") == 45.0  # a hyphen after a letter separates words
    assert angle_from_name("pier_\u221245deg.png") == -45.0
    assert angle_from_name("pier_22,5deg.png") == 22.5


@pytest.mark.parametrize("name, match", [
    ("two_0deg_90deg.png", "2 angle tokens"),   # two tokens: no longer silently None
    ("a_1.35e2deg.png", "exponent"),
    ("a_1.5.5deg.png", "two decimal marks"),
    ("a_1,350deg.png", "reads two ways"),        # a decimal comma or a thousands separator
])
def test_names_that_read_more_than_one_way_are_refused(name, match):
    with pytest.raises(InputError, match=match) as info:
        angle_from_name(name)
    assert name in str(info.value)


def test_split_name_gives_the_bracket_stem():
    assert split_name("pier_045deg_b.tif") == ("pier_b", 45.0)
    assert split_name("shot_2_45deg.png") == ("shot_2", 45.0)
    assert split_name("plain.png") is None
