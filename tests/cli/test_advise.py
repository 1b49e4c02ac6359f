"""``polarsky advise``: the JSON contract (every key always present), words and pictures."""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

from polarsky.advice.result import ADVICE_KEYS
from polarsky.cli.main import main
from tests.synth import render_frames, write_pngs


def _glare_bracket(tmp_path):
    # invented scene: left half a horizontal-E glare (AoLP 10 deg, DoLP 0.6), right half an unpolarized object
    h, w = 20, 40
    s = np.zeros((3, 1, h, w))
    s[0] = 0.5
    s[1, 0, :, :20] = 0.5 * 0.6 * np.cos(np.radians(20))
    s[2, 0, :, :20] = 0.5 * 0.6 * np.sin(np.radians(20))
    angles = [0, 45, 90, 135]
    return write_pngs(tmp_path / "in", render_frames(s, angles), angles)


def test_advise_json_contract(tmp_path, capsys):
    paths = _glare_bracket(tmp_path)
    code = main(["advise", *map(str, paths), "--region", "0,0,20,20", "--json"])
    out = capsys.readouterr().out
    assert code == 0
    js = json.loads(out)
    assert list(js) == list(ADVICE_KEYS)  # every key, in order; null where it does not apply
    assert js["protect"] is None and js["contrast_gain"] is None and js["outputs"] is None
    assert js["region"] == "0,0,20,20" and js["region_pixels"] == 400 and js["polarizer"] == "front"
    assert js["best_angle_deg"] == pytest.approx(100.0, abs=0.05)
    assert js["region_dolp"] == pytest.approx(0.6, abs=1e-3)
    assert js["region_aolp_deg"] == pytest.approx(10.0, abs=0.05)
    assert js["reduction_stops"] == pytest.approx(-np.log2(1 - 0.6), abs=5e-3)
    code = main(["advise", *map(str, paths), "--region", "0,0,40,20", "--protect", "20,0,40,20", "--json",
                 "--extinction", "300"])
    js = json.loads(capsys.readouterr().out)
    assert list(js) == list(ADVICE_KEYS)
    assert js["protect"] == "20,0,40,20" and js["protect_pixels"] == 400 and js["extinction_ratio"] == 300
    assert js["minimum_angle_deg"] is not None and 0 < js["region_intensity"] < js["protect_intensity"]
    assert js["best_angle_deg"] == pytest.approx(100.0, abs=0.05)
    assert js["contrast_gain"] > 1.3


def test_advise_text_and_pictures(tmp_path):
    paths = _glare_bracket(tmp_path)
    mask = tmp_path / "mask.png"
    import cv2

    m = np.zeros((20, 40), np.uint8)
    m[:, :20] = 255
    cv2.imwrite(str(mask), m)
    r = subprocess.run([sys.executable, "-m", "polarsky", "advise", *map(str, paths), "--region", str(mask),
                        "--out", str(tmp_path / "adv")], cwd=tmp_path, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "100.0 deg" in r.stdout and "turn the filter" in r.stdout and "Safety" in r.stdout
    names = ["advice.json", "advice_axis.png", "advice_curve.png", "advice_preview.png"]
    assert sorted(p.name for p in (tmp_path / "adv").iterdir() if not p.name.startswith(".")) == names
    js = json.loads((tmp_path / "adv" / "advice.json").read_text())
    assert js["outputs"] == names and js["region"] == str(mask)
