"""Sky comparison inside a batch: a [geometry] or [sky] table compares every bracket with the model.

Brackets are processed with the per-bracket task in-process; the cluster path is covered
by test_runner.py.
"""

from __future__ import annotations

import json

import pytest

from polarsky.batch import runner
from polarsky.batch.config import load_settings, sky_requested
from polarsky.batch.discover import discover_brackets
from polarsky.batch.report import write_report
from polarsky.batch.task import process_bracket
from polarsky.errors import InputError

GEOMETRY = """[geometry]
when = "{when}"
lat = 47.0
lon = 8.0
hfov_deg = 70.0
yaw_deg = 10.0
pitch_deg = 25.0
roll_deg = 4.0
"""


@pytest.fixture(scope="module")
def sky_root(tmp_path_factory):
    from polarsky.synthetic.sky import render_sky_bracket, write_tiff_bracket
    from tests.sky_scene import ANGLES, geom

    root = tmp_path_factory.mktemp("sky") / "in"
    write_tiff_bracket(root, render_sky_bracket(geom(), ANGLES, noise_sigma=0.002), ANGLES, stem="east")
    return root


def _settings(tmp_path, text):
    p = tmp_path / "batch.toml"
    p.write_text(text)
    settings, tables = load_settings(p)
    return settings, sky_requested(tables)


def _run(root, out, settings, sky):
    runner.check_batch_settings(settings, sky=sky)
    out.mkdir(parents=True, exist_ok=True)
    return [process_bracket({"bracket": b, "out_dir": str(out), "settings": settings, "sky": sky, "run_id": "t"})
            for b in discover_brackets(root)]


def test_sky_residuals_reach_summary_and_report(sky_root, tmp_path):
    from tests.sky_scene import WHEN

    settings, sky = _settings(tmp_path, GEOMETRY.format(when=WHEN))
    assert sky
    out = tmp_path / "out"
    rows = _run(sky_root, out, settings, sky)
    assert [r["status"] for r in rows] == ["done"], [r["error"] for r in rows]
    for r in rows:
        result = json.loads((out / r["name"] / "sky.json").read_text())
        assert r["rms_dolp_residual"] == pytest.approx(result["rms_dolp_residual"], abs=1e-6)
        assert r["rms_aolp_residual_deg"] == pytest.approx(result["rms_aolp_residual_deg"], abs=1e-6)
        assert list((out / r["name"]).glob("thumb_sky_*residual*.png"))
    html = write_report(out / "report.html", rows, out_dir=out, title="t").read_text()
    assert "sky residuals" in html and 'src="thumb_sky' not in html  # embedded, not linked


def test_a_mosaic_sky_names_its_raw_frame_not_the_staging_folder(tmp_path):
    # the sky step of a mosaic bracket reads the bracket's stokes.nc while it is still being written
    import numpy as np

    from polarsky.synthetic.mosaic import mosaic_sample, write_mosaic_png
    from polarsky.synthetic.sky import render_sky_stokes
    from tests.sky_scene import WHEN, geom

    root = tmp_path / "in"
    root.mkdir()
    raw = mosaic_sample(render_sky_stokes(geom(), dtype=np.float64), "90,45;135,0", dtype=np.float64)
    write_mosaic_png(root / "cam_0001.png", raw, full=4095)
    settings, sky = _settings(tmp_path, GEOMETRY.format(when=WHEN) + "polarizer = 'front'\n"
                              "[mosaic]\nmosaic = '90,45;135,0'\n[read]\nbit_depth = 12\n[output]\npictures = false\n")
    (bracket,) = runner.list_brackets(root, settings=settings)
    (tmp_path / "out").mkdir()
    row = process_bracket({"bracket": bracket, "out_dir": str(tmp_path / "out"), "settings": settings, "sky": sky,
                           "run_id": "t"})
    assert row["status"] == "done", row["error"]
    result = json.loads((tmp_path / "out" / row["name"] / "sky.json").read_text())
    assert result["inputs"] == [str(root / "cam_0001.png")]
    assert ".polarsky-tmp" not in json.dumps(result)


def test_a_sky_table_alone_asks_for_the_comparison(tmp_path):
    assert _settings(tmp_path, "[sky]\nsolve = 'yaw'\n")[1]
    assert not _settings(tmp_path, "[read]\ntransfer = 'auto'\n")[1]


def test_a_night_sky_is_refused_before_any_bracket(tmp_path):
    # time and place of the whole batch in its file: the sun's elevation is known before any bracket runs
    with pytest.raises(InputError, match=r"batch.toml \[geometry\]: the sun is .* deg below the horizon at "
                                         r"2024-06-21T01:30:00\+02:00"):
        _settings(tmp_path, GEOMETRY.format(when="2024-06-21T01:30:00+02:00") + "[output]\npictures = false\n")


@pytest.mark.parametrize("text, match", [
    ("[sky]\nlatitude = 47.0\n", r"\[sky\]: unknown key 'latitude'"),
    ("[geometry]\npitch_deg = 120.0\n", r"\[geometry\] pitch_deg"),
])
def test_bad_sky_settings_are_named_before_any_bracket(tmp_path, text, match):
    with pytest.raises(InputError, match=match):
        _settings(tmp_path, text)
