"""Sweeps of the sky plan: over headings the deepest darkening lies 90 degrees from the sun."""

from __future__ import annotations

import pytest

from polarsky.errors import InputError
from polarsky.geometry import make_lens
from polarsky.options.syntax import parse_sweep, parse_time_sweep, parse_when, sweep_times
from polarsky.plan.sweep import sweep_sky
from tests.plan.test_sky import LAT, LON, WHEN, setup, sun_at


def test_deepest_heading_is_ninety_degrees_from_the_sun():
    # The band of strongest polarization lies 90 deg from the sun (Coulson 1988; AMS Glossary
    # "Atmospheric polarization"): with a narrow, level lens and a low sun the deepest darkening comes
    # at headings 90 deg either side of the sun's azimuth.
    sun = sun_at("2026-06-21T20:00:00+02:00")
    st = setup(lens=make_lens("pinhole", 40, 30, hfov_deg=10.0), pitch_deg=5.0, roll_deg=0.0)
    steps = [{"when": sun["when"], "sun": sun, "yaw_deg": y} for y in parse_sweep("0,355,5")]
    sw = sweep_sky(st, steps, kind="yaw")
    deepest = sw["rows"][sw["deepest_row"]]["yaw_deg"]
    assert (deepest - sun["azimuth_deg"]) % 180.0 == pytest.approx(90.0, abs=6.0)


def _time_steps(text):
    return [{"when": t.isoformat(), "sun": dict(sun_at(t.isoformat())), "yaw_deg": 72.0}
            for t in sweep_times(parse_time_sweep(text), parse_when(WHEN))]


def test_time_sweep_marks_night_rows_and_ring_readings():
    sw = sweep_sky(setup(), _time_steps("03:00,07:00,60"), kind="time", ring_offset_deg=10.0)
    first, last = sw["rows"][0], sw["rows"][-1]
    assert "below the horizon" in first["note"] and first["darkening_stops"] is None
    assert last["note"] is None and last["best_ring_reading_deg"] == pytest.approx((last["best_angle_deg"] - 10) % 180)
    assert "step(s) without daylit sky" in sw["summary_text"]


def test_a_sweep_without_daylight_is_refused():
    with pytest.raises(InputError, match="the sun stays below the horizon"):
        sweep_sky(setup(), _time_steps("00:00,02:00,60"), kind="time")
    assert LAT and LON
