"""Filter-angle advice: the closed forms against a brute-force search over filter angles."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.advice.angle import best_angle_for_contrast, best_angle_for_region, transmitted


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
