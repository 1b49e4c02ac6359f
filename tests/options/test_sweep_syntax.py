"""The syntax of sweeps and the planning options (polarsky.options.syntax / parsers)."""

from __future__ import annotations

import pytest

from polarsky.errors import InputError
from polarsky.options.settings import Settings
from polarsky.options.syntax import parse_sweep, parse_time_sweep, parse_when, sweep_times

WHEN = parse_when("2026-06-21T19:10:00+02:00")


def test_time_sweep_clock_times_on_the_date_and_offset_of_when():
    times = sweep_times(parse_time_sweep("06:00,08:00,1h"), WHEN)
    assert [t.isoformat() for t in times] == ["2026-06-21T06:00:00+02:00", "2026-06-21T07:00:00+02:00",
                                              "2026-06-21T08:00:00+02:00"]


def test_time_sweep_iso_times_keep_their_own_offset():
    times = sweep_times(parse_time_sweep("2026-06-21T04:00Z,2026-06-21T05:00Z,30min"), WHEN)
    assert [t.isoformat() for t in times] == ["2026-06-21T04:00:00+00:00", "2026-06-21T04:30:00+00:00",
                                              "2026-06-21T05:00:00+00:00"]


@pytest.mark.parametrize("text, match", [
    pytest.param("06:00,08:00", "START,END,STEP", id="two parts"),
    pytest.param("06:00,08:00,0", "step", id="zero step"),
    pytest.param("06:00,25:00,30", "not a clock time", id="hour 25"),
    pytest.param("06:00,2026-06-21T08:00+02:00,30", "both as clock times", id="mixed forms"),
    pytest.param("2026-06-21T06:00,2026-06-21T08:00,30", "neither a clock time", id="no UTC offset"),
    pytest.param("08:00,06:00,30", "START <= END", id="end before start"),
])
def test_bad_time_sweeps(text, match):
    with pytest.raises(InputError, match=match):
        sweep_times(parse_time_sweep(text), WHEN)


def test_sweep_values_and_limits():
    assert parse_sweep("0,85,5")[-1] == 85.0 and len(parse_sweep("0,85,5")) == 18
    assert parse_sweep("10,20,4") == (10.0, 14.0, 18.0)
    with pytest.raises(InputError, match="START,END,STEP"):
        parse_sweep("0,10", "--sweep-yaw")
    with pytest.raises(InputError, match="STEP above 0"):
        parse_sweep("0,10,-1", "--sweep-yaw")
    with pytest.raises(InputError, match="more than 1000"):
        parse_sweep("0,90,0.01", "--sweep")


@pytest.mark.parametrize("options, match", [
    ({"incidence_deg": 95}, r"--incidence-deg 95.* must lie in \[0, 90\]"),
    ({"index": -1.5}, "--index -1.5 must be a positive number"),
    ({"index": 0.9}, "not above 1"),
    ({"index": 6}, "above 5"),
    ({"size_px": "600,4"}, "between 8 and 8000"),
    ({"dolp_max": 1.5}, r"must lie in \(0, 1\]"),
    ({"radiance": "foggy"}, "--radiance 'foggy' is not a known sky radiance model"),
    ({"surface": "mud"}, "--surface 'mud' is not a known surface"),
    ({"behind_fraction": 0}, r"must lie in \(0, 1\]"),
])
def test_planning_options_refuse_bad_values(options, match):
    with pytest.raises(InputError, match=match):
        Settings.from_options(options)


def test_planning_options_parse():
    s = Settings.from_options({"size_px": "320,240", "sweep": "0,10,5", "surface": "Water", "source_aolp_deg": "-12"})
    assert s.plan.size_px == (320, 240) and s.glare.sweep == (0.0, 5.0, 10.0) and s.glare.surface == "water"
    assert s.ring.source_aolp_deg == -12.0 and s.plan.dolp_max == 0.7 and s.plan.radiance == "uniform"
