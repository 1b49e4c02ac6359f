"""The bracket manifest: one CSV reader for every command and the batch."""

from __future__ import annotations

import pytest

from polarsky.errors import InputError
from polarsky.read.manifest import read_manifest


def _frames(folder, n=3):
    for k in range(n):
        (folder / f"f{k}.png").write_bytes(b"x")


def test_header_case_and_spaces_do_not_matter(tmp_path):
    _frames(tmp_path)
    man = tmp_path / "m.csv"
    man.write_text("File, Angle_deg\nf0.png,0\n\nf1.png, 60\nf2.png,120\n")
    m = read_manifest(man)
    assert [p.name for p in m.files] == ["f0.png", "f1.png", "f2.png"]
    assert m.angles_deg == (0.0, 60.0, 120.0) and m.exposures_s == (None, None, None)
    assert all(p.parent == tmp_path for p in m.files)


@pytest.mark.parametrize("text, match", [
    ("file\nf0.png\n", "lacks column"),
    ("file,angle_deg,tilt\nf0.png,0,1\n", "unknown column"),
    ("file,angle_deg\n", "no rows"),
    ("file,angle_deg\nf0.png,abc\n", "angle_deg"),
    ("file,angle_deg,exposure_s\nf0.png,0,-1\n", "exposure_s must be positive"),
    ("file,angle_deg\ngone.png,0\n", "'gone.png', which does not exist"),
    ("file,angle_deg\nf0.png,0,9\n", "line 2 has 3 fields"),
    ("file,angle_deg\nf0.png,4_5\n", "line 2: angle_deg '4_5' is not a plain number.*no underscores"),
    ("file,angle_deg\nf0.png,nan\n", "line 2: angle_deg must be a finite number, got nan"),
    ("file,angle_deg\nf0.png,1.35e2\n", "line 2: angle_deg .* \\(no exponent\\)"),
    ('file,angle_deg\nf0.png,"1,350"\n', "line 2: angle_deg '1,350' reads two ways"),
    ("file,angle_deg,exposure_s\nf0.png,0,inf\n", "line 2: exposure_s must be a finite number, got inf"),
    ("file,angle_deg,exposure_s\nf0.png,0,1e999\n", "line 2: exposure_s 1e999 is too large"),
])
def test_bad_manifests_name_the_line_and_the_fix(tmp_path, text, match):
    _frames(tmp_path)
    man = tmp_path / "m.csv"
    man.write_text(text)
    with pytest.raises(InputError, match=match):
        read_manifest(man)


def test_missing_manifest(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        read_manifest(tmp_path / "none.csv")


def test_a_decimal_comma_and_a_unicode_minus_are_read(tmp_path):
    _frames(tmp_path)
    man = tmp_path / "m.csv"
    man.write_text('file,angle_deg,exposure_s\nf0.png,"22,5","0,01"\nf1.png,\u221245,1e-2\nf2.png,90,0.01\n',
                   encoding="utf-8")
    m = read_manifest(man)
    assert m.angles_deg == (22.5, -45.0, 90.0) and m.exposures_s == (0.01, 0.01, 0.01)


def test_a_listed_frame_behind_a_looping_link_is_said_so(tmp_path):
    _frames(tmp_path, 2)
    (tmp_path / "loop.png").symlink_to("loop.png")
    man = tmp_path / "m.csv"
    man.write_text("file,angle_deg\nf0.png,0\nf1.png,60\nloop.png,120\n")
    with pytest.raises(InputError, match="line 4 names 'loop.png', which is a symbolic link that loops"):
        read_manifest(man)

