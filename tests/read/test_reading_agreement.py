"""The single-bracket reader and the batch discovery read the same names and manifests alike.

Property-based (hypothesis): generated file names (angle tokens written in every form the
name parser accepts or refuses) and manifests (header spellings, number forms) must give the
same frames and analyzer angles from ``polarsky.read.bracket.bracket_files`` (what
``stokes``, ``advise`` and ``sky`` use) and from ``polarsky.batch.discover.discover_brackets``
(what ``batch`` uses), or be refused by both.  A property of our own code: one parser serves
both paths.
"""

from __future__ import annotations

import csv
import tempfile
import warnings
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from polarsky.batch.discover import discover_brackets
from polarsky.errors import InputError, PolarskyWarning
from polarsky.options.settings import ReadSettings
from polarsky.read.bracket import bracket_files
from polarsky.read.formats import FRAME_SUFFIXES

STEMS = st.from_regex(r"[a-z][a-z0-9]{0,5}([_-][a-z0-9]{1,4})?", fullmatch=True)
ANGLES = st.lists(st.integers(-170, 179), min_size=3, max_size=6, unique=True)


@st.composite
def token(draw, angle):
    """An angle token as people write it (some forms are refused by the parser on purpose)."""
    text = str(abs(angle))
    if draw(st.booleans()):
        text = text.zfill(3)
    frac = draw(st.sampled_from(["", ".0", ".5", ",5", "e0"]))
    sign = "" if angle >= 0 else draw(st.sampled_from(["-", "\u2212"]))
    return sign + text + frac + draw(st.sampled_from(["deg", "DEG"]))


@st.composite
def bracket_names(draw):
    stem = draw(STEMS)
    angles = draw(ANGLES)
    sep = draw(st.sampled_from(["_", "__", " "]))
    suffix = draw(st.sampled_from(FRAME_SUFFIXES))
    after = draw(st.sampled_from(["", "_b"]))
    return [f"{stem}{sep}{draw(token(a))}{after}{suffix}" for a in angles]


def _single(files, read):
    """What a command makes of the files: their angles, checked as every command checks them."""
    from polarsky.core.stokes import check_angles

    try:
        got, angles, _, _ = bracket_files(files, read)
        with warnings.catch_warnings():  # badly conditioned angles are warned about, not refused
            warnings.simplefilter("ignore", PolarskyWarning)
            check_angles(angles)
    except InputError:
        return "refused"
    return sorted(zip((float(a) for a in angles), (p.name for p in got)))


def _batch(folder):
    found = discover_brackets(folder)
    if len(found) != 1 or found[0].problem is not None:
        return "refused"
    b = found[0]
    return sorted(zip((float(a) for a in b.angles_deg), (p.name for p in b.frames)))


@settings(max_examples=60, deadline=None)
@given(bracket_names())
def test_angle_tokens_read_alike_by_the_bracket_reader_and_the_batch(names):
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for n in names:
            (folder / n).write_bytes(b"")
        files = [folder / n for n in names]
        single = _single(files, ReadSettings())
        batch = _batch(folder)
        if single == "refused":
            # a name that reads more than one way is refused by both; the batch lists it as failed
            assert batch == "refused"
        else:
            assert batch == single
            assert len(single) == len(names)


HEADERS = st.sampled_from([("file", "angle_deg"), ("File", "Angle_deg"), (" FILE ", " angle_deg "),
                           ("file", "angle_deg", "exposure_s")])
NUMBERS = st.sampled_from(["{a}", "{a}.0", " {a} ", "{a}.25", "{a}e0", "4_5", "nan", ""])


@settings(max_examples=60, deadline=None)
@given(HEADERS, ANGLES, NUMBERS)
def test_manifests_read_alike_by_the_bracket_reader_and_the_batch(header, angles, number):
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        rows = []
        for k, a in enumerate(angles):
            name = f"frame {k}.png"
            (folder / name).write_bytes(b"")
            row = [name, number.format(a=a) if k == 1 else str(a)]
            if len(header) == 3:
                row.append("0.01")
            rows.append(row)
        with open(folder / "manifest.csv", "w", newline="", encoding="utf-8") as fh:
            csv.writer(fh).writerows([list(header)] + rows)
        single = _single([], ReadSettings(manifest=folder / "manifest.csv"))
        assert _batch(folder) == single
