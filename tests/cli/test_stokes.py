"""``polarsky stokes`` (and ``advise``) on bad input: exit status 2, one line 'error: ...', no traceback,
no partial output, inputs untouched."""

from __future__ import annotations

import hashlib
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from polarsky.cli.main import main
from tests.synth import render_frames, smooth_scene, write_pngs


def _digest(paths):
    return {str(p): (hashlib.sha256(Path(p).read_bytes()).hexdigest(), Path(p).stat().st_mtime_ns) for p in paths}


def _run(args, capsys):
    code = main(args)
    err = capsys.readouterr().err.strip().splitlines()
    return code, err


@pytest.fixture
def good(tmp_path):
    s = smooth_scene(12, 16)
    return write_pngs(tmp_path / "in", render_frames(s, [0, 45, 90, 135]), [0, 45, 90, 135])


def _check(code, err, match, out):
    assert code == 2
    errors = [e for e in err if e.startswith("error:")]
    assert len(errors) == 1, err
    assert match in errors[0], errors[0]
    assert not any("Traceback" in e for e in err)
    assert not out.exists() or list(out.iterdir()) == []


def test_missing_file(good, tmp_path, capsys):
    out = tmp_path / "out"
    code, err = _run(["stokes", *map(str, good[:3]), str(tmp_path / "nope_135deg.png"), "--out", str(out)], capsys)
    _check(code, err, "does not exist", out)


def test_truncated_file(good, tmp_path, capsys):
    bad = tmp_path / "in" / "cut_135deg.png"
    data = good[3].read_bytes()
    bad.write_bytes(data[: len(data) // 2])
    before = _digest(good[:3] + [bad])
    out = tmp_path / "out"
    code, err = _run(["stokes", *map(str, good[:3]), str(bad), "--out", str(out)], capsys)
    _check(code, err, "cut_135deg.png cannot be decoded", out)
    assert _digest(good[:3] + [bad]) == before


def test_not_an_image(good, tmp_path, capsys):
    bad = tmp_path / "in" / "text_135deg.tif"
    bad.write_text("hello")
    code, err = _run(["stokes", *map(str, good[:3]), str(bad), "--out", str(tmp_path / "o")], capsys)
    _check(code, err, "cannot be decoded", tmp_path / "o")


def test_different_sizes(good, tmp_path, capsys):
    s = smooth_scene(10, 16)
    other = write_pngs(tmp_path / "other", render_frames(s, [135]), [135])
    code, err = _run(["stokes", *map(str, good[:3]), str(other[0]), "--out", str(tmp_path / "o")], capsys)
    _check(code, err, "must have the same size", tmp_path / "o")


def test_different_channel_counts(good, tmp_path, capsys):
    s = smooth_scene(12, 16, channels=3)
    other = write_pngs(tmp_path / "other", render_frames(s, [135]), [135])
    code, err = _run(["stokes", *map(str, good[:3]), str(other[0]), "--out", str(tmp_path / "o")], capsys)
    _check(code, err, "channel", tmp_path / "o")


def test_too_few_distinct_angles(good, tmp_path, capsys):
    code, err = _run(["stokes", *map(str, good), "--angles", "0,90,180,270", "--out", str(tmp_path / "o")], capsys)
    _check(code, err, "distinct", tmp_path / "o")
    code, err = _run(["stokes", *map(str, good[:2]), "--out", str(tmp_path / "o")], capsys)
    _check(code, err, "at least 3", tmp_path / "o")


def test_manifest_naming_absent_file(good, tmp_path, capsys):
    man = tmp_path / "in" / "manifest.csv"
    man.write_text("file,angle_deg\n" + "".join(f"{p.name},{a}\n" for p, a in zip(good, [0, 45, 90, 135])) + "gone.png,30\n")
    code, err = _run(["stokes", "--manifest", str(man), "--out", str(tmp_path / "o")], capsys)
    _check(code, err, "gone.png", tmp_path / "o")


def test_all_saturated_frame(good, tmp_path, capsys):
    import cv2

    hot = tmp_path / "in" / "hot_135deg.png"
    cv2.imwrite(str(hot), np.full((12, 16), 65535, np.uint16))
    code, err = _run(["stokes", *map(str, good[:3]), str(hot), "--out", str(tmp_path / "o")], capsys)
    _check(code, err, "saturated everywhere", tmp_path / "o")


def test_pixel_limit(good, tmp_path, capsys):
    code, err = _run(["stokes", *map(str, good), "--max-pixels", "100", "--out", str(tmp_path / "o")], capsys)
    _check(code, err, "--max-pixels", tmp_path / "o")


def test_no_angle_information(tmp_path, capsys):
    s = smooth_scene(8, 8)
    paths = write_pngs(tmp_path, render_frames(s, [0, 45, 90]), [0, 45, 90])
    renamed = []
    for i, p in enumerate(paths):
        q = p.with_name(f"frame{i}.png")
        p.rename(q)
        renamed.append(q)
    code, err = _run(["stokes", *map(str, renamed), "--out", str(tmp_path / "o")], capsys)
    _check(code, err, "cannot tell the analyzer angle", tmp_path / "o")


def test_bad_region_and_usage(good, tmp_path, capsys):
    code, err = _run(["advise", *map(str, good), "--region", "0,0,999,5"], capsys)
    _check(code, err, "does not fit", tmp_path / "none")
    code, err = _run(["advise", *map(str, good), "--region", "banana"], capsys)
    _check(code, err, "neither a box", tmp_path / "none")
    code, err = _run(["stokes", *map(str, good)], capsys)  # --out missing: a usage error
    _check(code, err, "--out", tmp_path / "none")


def test_subprocess_error_is_one_line(good, tmp_path):
    r = subprocess.run([sys.executable, "-m", "polarsky", "stokes", str(good[0]), "--out", str(tmp_path / "o")],
                       cwd=tmp_path, capture_output=True, text=True)
    assert r.returncode == 2
    assert r.stderr.strip().count("\n") == 0 and r.stderr.startswith("error: ")
    assert r.stdout == ""


def test_out_folder_holding_other_files(good, tmp_path, capsys):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("keep")
    code, err = _run(["stokes", *map(str, good), "--out", str(out)], capsys)
    assert code == 2 and len(err) == 1 and "already holds files polarsky did not write" in err[0]
    assert [p.name for p in out.iterdir()] == ["notes.txt"]
