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
