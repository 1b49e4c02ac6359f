"""Filter-angle advice: closed forms against brute force, the JSON contract, pictures."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from cli.main import main
from polarsky.advice import best_angle_for_contrast, best_angle_for_region, transmitted
from tests.synth import render_frames, write_pngs

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.parametrize("seed", range(5))
def test_region_minimum_matches_grid_search(seed):
    rng = np.random.default_rng(seed)
    s = np.array([1.0, *rng.uniform(-0.6, 0.6, 2)])
    for d in (1.0, 0.9):
        r = best_angle_for_region(s, diattenuation=d)
        th = np.linspace(0, 180, 36001)
        t = transmitted(s[:, None], th, diattenuation=d)
        assert (r["best_angle_deg"] - th[np.argmin(t)] + 90) % 180 - 90 == pytest.approx(0, abs=0.01)
        # reduction: mean over a full turn / minimum; ideal filter: -log2(1 - DoLP) (Malus, Collett 2005)
        assert r["reduction_stops"] == pytest.approx(np.log2(t.mean() / t.min()), abs=1e-3)
    p = np.hypot(s[1], s[2]) / s[0]
    assert best_angle_for_region(s)["reduction_stops"] == pytest.approx(-np.log2(1 - p), abs=1e-4)


@pytest.mark.parametrize("seed", range(6))
def test_contrast_maximum_matches_grid_search(seed):
    rng = np.random.default_rng(100 + seed)
    sp = np.array([1.0, *rng.uniform(-0.5, 0.5, 2)])
    sr = np.array([2.0, *rng.uniform(-1.2, 1.2, 2)])
    res = best_angle_for_contrast(sp, sr)
    th = np.linspace(0, 180, 36001)
    ratio = transmitted(sp[:, None], th) / transmitted(sr[:, None], th)
    assert (res["best_angle_deg"] - th[np.argmax(ratio)] + 90) % 180 - 90 == pytest.approx(0, abs=0.02)
    assert res["contrast_gain"] == pytest.approx(ratio.max() / (sp[0] / sr[0]), rel=1e-5)


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
    assert js["best_angle_deg"] == pytest.approx(100.0, abs=0.05)
    assert js["region_dolp"] == pytest.approx(0.6, abs=1e-3)
    assert js["region_aolp_deg"] == pytest.approx(10.0, abs=0.05)
    assert js["reduction_stops"] == pytest.approx(-np.log2(1 - 0.6), abs=5e-3)
    code = main(["advise", *map(str, paths), "--region", "0,0,40,20", "--protect", "20,0,40,20", "--json",
                 "--extinction", "300"])
    js = json.loads(capsys.readouterr().out)
    assert {"best_angle_deg", "reduction_stops", "region_dolp", "region_aolp_deg", "contrast_gain",
            "protect_intensity", "region_intensity"} <= set(js)
    assert js["best_angle_deg"] == pytest.approx(100.0, abs=0.05)
    assert js["contrast_gain"] > 1.3


def test_advise_text_and_pictures(tmp_path):
    paths = _glare_bracket(tmp_path)
    mask = tmp_path / "mask.png"
    import cv2

    m = np.zeros((20, 40), np.uint8)
    m[:, :20] = 255
    cv2.imwrite(str(mask), m)
    r = subprocess.run([sys.executable, "-m", "cli.main", "advise", *map(str, paths), "--region", str(mask),
                        "--out", str(tmp_path / "adv")], cwd=ROOT, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "100.0 deg" in r.stdout and "turn the filter" in r.stdout and "Safety" in r.stdout
    assert sorted(p.name for p in (tmp_path / "adv").iterdir()) == [
        "advice.json", "advice_axis.png", "advice_curve.png", "advice_preview.png"]
