"""Regression values: numbers our own planning code produced for the demo site.

These are NOT validation against outside sources (see tests/plan/ for those); they only guard
against unintended changes. Update them deliberately when the sky model, the sun position or
the planning definitions change.
"""

from __future__ import annotations

import pytest

from polarsky.synthetic import harbour as hb
from polarsky.tasks.plan_glare import run_plan_glare
from polarsky.tasks.plan_sky import run_plan_sky


def test_demo_site_sky_plan_regression():
    h, w = hb.SKY_SIZE
    r = run_plan_sky(when=hb.SKY_WHEN, lat=hb.SKY_LAT, lon=hb.SKY_LON, altitude_m=hb.SKY_ALT_M, size_px=(w, h),
                     **hb.SKY_CAMERA)
    assert r["best_angle_deg"] == pytest.approx(131.3, abs=0.2)
    assert r["darkening_stops"] == pytest.approx(0.73, abs=0.01)
    assert r["darkening_stops_min"] == pytest.approx(0.05, abs=0.01)
    assert r["darkening_stops_max"] == pytest.approx(1.74, abs=0.01)
    assert r["darkening_stops_thirds"]["left"] == pytest.approx(1.15, abs=0.02)
    assert r["darkening_stops_thirds"]["right"] == pytest.approx(0.31, abs=0.02)
    assert r["scattering_angle_center_deg"] == pytest.approx(123.5, abs=0.1)


def test_demo_harbour_glare_plan_regression():
    r = run_plan_glare(surface="water", incidence_deg=hb.water_incidence_deg(), roll_deg=hb.CAMERA_ROLL_DEG)
    assert hb.water_incidence_deg() == 64.5
    assert r["best_angle_deg"] == 98.0
    assert r["reflection_dolp"] == pytest.approx(0.8172, abs=1e-3)
    assert r["reduction_stops_ideal"] == pytest.approx(2.451, abs=1e-2)
