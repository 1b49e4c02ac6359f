"""summary.json, advice.json, sky.json, plan_sky.json, plan_glare.json and the ring calibration.json validate against their one documented schema on every path.

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
                                    mosaic_color=colour, demosaic=method, pictures=False))
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


@pytest.fixture(scope="module")
def ring_dir(tmp_path_factory):
    from polarsky.tasks.calibrate_ring import run_calibrate_ring
    from tests.tasks.test_calibrate_ring import reference_bracket

    folder = tmp_path_factory.mktemp("ring")
    frames = reference_bracket(folder / "in", offset_deg=7.0)
    res = run_calibrate_ring(frames, folder / "cal", region="0,0,60,40")
    return {"frames": frames, "cal": folder / "cal", "result": res}


def test_calibrate_ring_json_validates(ring_dir):
    res = ring_dir["result"]
    _validate(json.loads(json.dumps(res)), "calibrate_ring")
    assert json.loads((ring_dir["cal"] / "calibration.json").read_text()) == json.loads(json.dumps(res))


def test_advice_with_a_surface_and_a_ring_validates(ring_dir, tmp_path):
    from polarsky.tasks.advise import run_advise

    a = run_advise(ring_dir["frames"], tmp_path / "a", region="0,0,60,40", calibration=str(ring_dir["cal"]),
                   surface="water", pitch_deg=-30)
    b = run_advise(ring_dir["frames"], region="0,0,60,40", index=1.5)
    for r in (a, b):
        _validate(json.loads(json.dumps(r)), "advice")
    assert a["best_ring_reading_deg"] is not None and a["surface_estimate"]["pitch_deg"] == -30.0
    assert b["best_ring_reading_deg"] is None and b["surface_estimate"]["pitch_deg"] is None
    assert json.loads((tmp_path / "a" / "advice.json").read_text()) == json.loads(json.dumps(a))


PLAN_SITE = {"when": "2026-06-21T19:10:00+02:00", "lat": 46.37, "lon": 9.84, "hfov_deg": 70, "yaw_deg": 72,
             "pitch_deg": 28, "size_px": "64,48"}   # the demo's invented site


@pytest.mark.parametrize("extra", [{}, {"region": "0,0,30,20", "extinction": 300, "radiance": "cie-clear"},
                                   {"sweep_time": "03:00,21:00,180", "sweep_yaw": "0,300,60", "out": True},
                                   {"ring": True, "sweep_yaw": "0,90,90"}])
def test_plan_sky_json_validates(extra, tmp_path, ring_dir):
    from polarsky.tasks.plan_sky import run_plan_sky

    extra = dict(extra)
    out = tmp_path / "p" if extra.pop("out", False) else None
    if extra.pop("ring", False):
        extra["calibration"] = str(ring_dir["cal"])
    r = run_plan_sky(out, **PLAN_SITE, **extra)
    _validate(json.loads(json.dumps(r)), "plan_sky")
    if out is not None:
        assert json.loads((out / "plan_sky.json").read_text()) == json.loads(json.dumps(r))


@pytest.mark.parametrize("extra", [{"surface": "water"}, {"index": 1.5, "behind_fraction": 0.2, "sweep": "0,85,5"},
                                   {"surface": "glass", "extinction": 30, "out": True}, {"surface": "ice", "ring": True}])
def test_plan_glare_json_validates(extra, tmp_path, ring_dir):
    from polarsky.tasks.plan_glare import run_plan_glare

    extra = dict(extra)
    out = tmp_path / "g" if extra.pop("out", False) else None
    if extra.pop("ring", False):
        extra["calibration"] = str(ring_dir["cal"])
    r = run_plan_glare(out, incidence_deg=56.30993247402, **extra)
    _validate(json.loads(json.dumps(r)), "plan_glare")
    if out is not None:
        assert json.loads((out / "plan_glare.json").read_text()) == json.loads(json.dumps(r))
