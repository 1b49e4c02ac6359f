"""``plan sky`` as a task: settings as 'polarsky sky' takes them, files published whole, ring readings."""

from __future__ import annotations

import json

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.tasks.plan_sky import plan_sky, run_plan_sky

SITE = {"when": "2026-06-21T19:10:00+02:00", "lat": 46.37, "lon": 9.84, "altitude_m": 420.0}   # invented site
CAM = {"hfov_deg": 70.0, "yaw_deg": 72.0, "pitch_deg": 28.0, "roll_deg": 2.5, "size_px": "96,64"}


def test_the_plan_is_the_plan_layers_for_the_same_geometry():
    # The task builds the same lens and sun as 'polarsky sky' (NREL SPA via pvlib, Reda & Andreas 2004):
    # the sun position of the result is pvlib's for that time and place.
    from polarsky.options.syntax import parse_when
    from polarsky.sky.sun import sun_position

    planned = plan_sky(**SITE, **CAM)
    r = planned.result
    sun = sun_position(parse_when(SITE["when"]), SITE["lat"], SITE["lon"], altitude_m=SITE["altitude_m"])
    assert r["sun_azimuth_deg"] == pytest.approx(sun["azimuth_deg"], abs=1e-4)
    assert r["width_px"] == 96 and r["height_px"] == 64 and r["lens"]["lens"] == "pinhole"
    assert r["dolp_max"] == 0.7 and "Kreuter" in r["dolp_max_source"]
    assert r["outputs"] is None and r["sweep_time"] is None and r["region"] is None
    assert planned.plan.maps["sky"].shape == (64, 96)


def test_files_region_sweeps(tmp_path):
    out = tmp_path / "o"
    r = run_plan_sky(out, **SITE, **CAM, region="0,0,40,30", sweep_time="05:00,21:00,120", sweep_yaw="0,330,30",
                     dolp_max=0.6)
    names = sorted(p.name for p in out.iterdir() if p.name[0] != ".")
    assert names == ["plan_sky.json", "plan_sky_darkening.png", "plan_sky_dolp.png", "plan_sky_sweep_time.png",
                     "plan_sky_sweep_yaw.png"]
    assert r["outputs"] == ["plan_sky.json", "plan_sky_dolp.png", "plan_sky_darkening.png", "plan_sky_sweep_time.png",
                            "plan_sky_sweep_yaw.png"]
    assert json.loads((out / "plan_sky.json").read_text()) == json.loads(json.dumps(r))
    assert r["region"] == "0,0,40,30" and r["region_pixels"] == 40 * 30
    assert r["dolp_max_source"] == "given with --dolp-max"
    assert r["sweep_time"]["rows"][0]["note"] and len(r["sweep_yaw"]["rows"]) == 12


def test_ring_readings_from_a_ring_calibration(tmp_path):
    from tests.tasks.test_calibrate_ring import reference_bracket
    from polarsky.tasks.calibrate_ring import run_calibrate_ring

    ring = run_calibrate_ring(reference_bracket(tmp_path / "in", offset_deg=7.0), tmp_path / "ring",
                              region="0,0,60,40")
    r = plan_sky(**SITE, **CAM, calibration=str(tmp_path / "ring"), region="0,0,40,30", sweep_yaw="0,90,90").result
    off = ring["ring_offset_deg"]
    assert r["ring_offset_deg"] == off and r["calibration"]["kind"] == "ring"
    assert r["best_ring_reading_deg"] == pytest.approx((r["best_angle_deg"] - off) % 180, abs=1e-3)
    assert r["region_best_ring_reading_deg"] == pytest.approx((r["region_best_angle_deg"] - off) % 180, abs=1e-3)
    row = r["sweep_yaw"]["rows"][0]
    assert row["best_ring_reading_deg"] == pytest.approx((row["best_angle_deg"] - off) % 180, abs=1e-3)


def test_a_sky_calibration_is_not_a_ring(tmp_path):
    from polarsky.estimate.calibration import Calibration
    from polarsky.write.calibration_file import write_calibration

    write_calibration(tmp_path / "calibration.nc", Calibration(kind="sky", angle_offset_deg=np.array([1.0])))
    with pytest.raises(InputError, match="not a filter-ring one"):
        plan_sky(**SITE, **CAM, calibration=str(tmp_path))


@pytest.mark.parametrize("drop, match", [("when", "time is unknown"), ("lat", "give both --lat and --lon")])
def test_time_and_place_are_required(drop, match):
    with pytest.raises(InputError, match=match):
        plan_sky(**{k: v for k, v in SITE.items() if k != drop}, **CAM)


def test_a_region_outside_the_frame_or_without_sky():
    with pytest.raises(InputError, match="does not fit in the 96x64 frame"):
        plan_sky(**SITE, **CAM, region="0,0,200,30")
    with pytest.raises(InputError, match="holds no sky pixel"):
        plan_sky(**SITE, **dict(CAM, pitch_deg=2.0), region="0,60,10,64")
