"""Sky comparison inside a batch (runs only where the sky support is installed).

Brackets are processed with the per-bracket task in-process; the cluster path is covered
by test_batch_run.py.
"""

from __future__ import annotations

import pytest

from polarsky.batch import runner
from polarsky.batch.config import merge_settings
from polarsky.batch.discover import discover_brackets
from polarsky.batch.report import write_report
from polarsky.errors import InputError

if runner.step_functions()[2] is None:
    pytest.skip("polarsky.sky is not part of this installation", allow_module_level=True)

WHEN = "2024-06-21T17:30:00+02:00"
GEO = {"when": WHEN, "lat": 47.0, "lon": 8.0, "hfov_deg": 70.0, "yaw_deg": 10.0, "pitch_deg": 25.0,
       "roll_deg": 4.0}


@pytest.fixture(scope="module")
def sky_root(tmp_path_factory):
    from polarsky.geometry import make_lens
    from polarsky.sky.skymap import SkyGeometry
    from polarsky.sky.sun import parse_when, sun_position
    from polarsky.sky.synth import render_sky_bracket, write_tiff_bracket

    root = tmp_path_factory.mktemp("sky") / "in"
    sun = sun_position(parse_when(WHEN), 47.0, 8.0)
    g = SkyGeometry(make_lens("pinhole", 64, 48, hfov_deg=70), 10, 25, 4, sun["azimuth_deg"], sun["elevation_deg"])
    for stem in ("east",):
        write_tiff_bracket(root, render_sky_bracket(g, (0, 45, 90, 135), noise_sigma=0.002), (0, 45, 90, 135),
                           stem=stem)
    return root


def _run(root, out, settings):
    out.mkdir(parents=True, exist_ok=True)
    return [runner.process_bracket({"bracket": b, "out_dir": str(out), "settings": settings, "run_id": "t"})
            for b in discover_brackets(root)]


def test_sky_residuals_reach_summary_and_report(sky_root, tmp_path):
    import json

    settings = merge_settings({"sky": GEO})
    runner.check_steps(settings)
    rows = _run(sky_root, tmp_path / "out", settings)
    assert [r["status"] for r in rows] == ["done"], [r["error"] for r in rows]
    for r in rows:
        sky = json.loads((tmp_path / "out" / r["name"] / "sky.json").read_text())
        assert r["sky_dolp_residual_rms"] == pytest.approx(sky["dolp_rms"], abs=1e-6)
        assert r["sky_aolp_residual_rms_deg"] == pytest.approx(sky["aolp_rms_deg"], abs=1e-6)
        assert list((tmp_path / "out" / r["name"]).glob("thumb_sky_*residual*.png"))
    html = write_report(tmp_path / "out" / "report.html", rows, out_dir=tmp_path / "out", title="t").read_text()
    assert "sky residuals" in html and 'src="thumb_sky' not in html  # embedded, not linked


def test_bad_geometry_fails_each_bracket_with_the_reason(sky_root, tmp_path):
    rows = _run(sky_root, tmp_path / "out", merge_settings({"sky": {**GEO, "pitch_deg": 120.0},
                                                            "stokes": {"pictures": False}}))
    assert [r["status"] for r in rows] == ["failed"]
    assert all("pitch" in r["error"] for r in rows)


def test_unknown_sky_key_is_named():
    with pytest.raises(InputError, match=r"unknown key\(s\) in \[sky\]: latitude"):
        runner.check_steps(merge_settings({"sky": {"latitude": 47.0}}))
