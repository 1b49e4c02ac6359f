"""summary.json, advice.json and sky.json validate against their one documented schema on every path.

The schemas are docs/schemas/*.schema.json (JSON Schema 2020-12, checked with the
general-purpose ``jsonschema`` library); a bracket and a mosaic frame give summaries with the
same keys and key types, and the batch's table is read from the documented keys.
"""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from tests.synth import render_frames, smooth_scene, write_pngs

SCHEMAS = Path(__file__).resolve().parents[2] / "docs" / "schemas"


def _validate(obj, name):
    schema = json.loads((SCHEMAS / f"{name}.schema.json").read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.validate(obj, schema)


@pytest.fixture(scope="module")
def bracket(tmp_path_factory):
    folder = tmp_path_factory.mktemp("bracket")
    angles = [0, 45, 90, 135]
    return write_pngs(folder, render_frames(smooth_scene(24, 32, channels=3), angles, noise=0.003), angles, bits=16)


def _mosaic(folder, colour=None):
    from polarsky.mosaic.layout import parse_mosaic
    from polarsky.synthetic.mosaic import mosaic_sample, scene_edges, write_mosaic_png

    raw = mosaic_sample(scene_edges(32, 40), parse_mosaic("90,45;135,0", colour))
    Path(folder).mkdir(parents=True, exist_ok=True)
    path = Path(folder) / "mosaic.png"
    write_mosaic_png(path, raw, bits=16)
    return path


def test_summaries_of_a_bracket_and_of_mosaic_frames_share_one_schema(tmp_path, bracket):
    from polarsky.tasks.stokes import run_stokes

    summaries = [run_stokes(bracket, tmp_path / "b", pictures=False)]
    for colour, method in ((None, "superpixel"), (None, "newton"), ("RGGB", "bilinear")):
        m = _mosaic(tmp_path / f"m-{colour}-{method}", colour)
        summaries.append(run_stokes([m], tmp_path / f"o-{colour}-{method}", mosaic="90,45;135,0",
                                    mosaic_colour=colour, demosaic=method, pictures=False))
    for s in summaries:
        _validate(s, "summary")
    # written file == returned dict
    assert json.loads((tmp_path / "b" / "summary.json").read_text()) == json.loads(json.dumps(summaries[0]))
    keys = [list(s) for s in summaries]
    assert all(k == keys[0] for k in keys)
    for key in keys[0]:
        kinds = {type(s[key]).__name__ for s in summaries if s[key] is not None}
        assert len(kinds) <= 1 or kinds == {"int", "float"}, (key, kinds)


def test_advice_validates_with_and_without_a_protected_region(tmp_path, bracket):
    from polarsky.tasks.advise import run_advise

    a = run_advise(bracket, region="2,2,20,12")
    b = run_advise(bracket, tmp_path / "adv", region="2,2,20,12", protect="20,12,30,22")
    for r in (a, b):
        _validate(json.loads(json.dumps(r)), "advice")
    assert list(a) == list(b)
    assert a["outputs"] is None and "advice.json" in b["outputs"]


def test_sky_json_validates(tmp_path):
    from polarsky.geometry import make_lens
    from polarsky.options.syntax import parse_when
    from polarsky.sky.skymap import SkyGeometry
    from polarsky.sky.sun import sun_position
    from polarsky.synthetic.sky import render_sky_bracket, write_tiff_bracket
    from polarsky.tasks.sky import run_sky

    when, lat, lon = "2026-06-21T19:10:00+02:00", 46.37, 9.84  # the demo's invented site
    sun = sun_position(parse_when(when), lat, lon)
    geom = SkyGeometry(make_lens("pinhole", 64, 48, hfov_deg=60), 72.0, 28.0, 0.0, sun["azimuth_deg"],
                       sun["elevation_deg"], "front")
    frames = write_tiff_bracket(tmp_path / "in", render_sky_bracket(geom, (0, 45, 90, 135), dolp_max=0.7),
                                [0, 45, 90, 135])
    res = run_sky(frames, tmp_path / "sky", when=when, lat=lat, lon=lon, hfov_deg=60, yaw_deg=72, pitch_deg=28,
                  pictures=False)
    _validate(res, "sky")
    assert res == json.loads((tmp_path / "sky" / "sky.json").read_text())


def test_batch_reads_the_documented_keys(tmp_path, bracket):
    import shutil

    from polarsky.batch.discover import discover_brackets
    from polarsky.batch.task import process_bracket
    from polarsky.options.settings import Settings

    root = tmp_path / "root"
    root.mkdir()
    for p in bracket:
        shutil.copy(p, root / p.name)
    (b,) = discover_brackets(root)
    settings = Settings.from_options({"region": "2,2,20,12", "pictures": False})
    row = process_bracket({"bracket": b, "out_dir": str(tmp_path / "out"), "settings": settings, "sky": False,
                           "run_id": "t"})
    assert row["status"] == "done", row
    summary = json.loads((tmp_path / "out" / b.name / "summary.json").read_text())
    advice = json.loads((tmp_path / "out" / b.name / "advice.json").read_text())
    assert row["mean_dolp"] == pytest.approx(np.mean(list(summary["mean_dolp"].values())), abs=1e-6)
    assert row["best_angle_deg"] == advice["best_angle_deg"]
    assert row["reduction_stops"] == advice["reduction_stops"]
    assert row["analyzer_angles_deg"] == "0,45,90,135"
