"""``plan glare`` as a task: the surface table, the sweep with Brewster's own row, files, ring readings."""

from __future__ import annotations

import json

import pytest

from polarsky.errors import InputError
from polarsky.tasks.plan_glare import run_plan_glare


def test_water_from_the_table_and_the_sweep(tmp_path):
    # Brewster's angle of the IAPWS water (53.12 deg; IUPAC Gold Book: about 53 deg) is a row of its own.
    r = run_plan_glare(tmp_path / "g", surface="water", incidence_deg=60, extinction=300, behind_fraction=0.3,
                       sweep="0,85,5")
    assert r["surface"] == "water" and "IAPWS" in r["index_source"] and r["wavelength_nm"] == 589.3
    rows = [row["incidence_deg"] for row in r["sweep"]]
    assert 53.1228 in rows and len(rows) == 19
    assert sorted(p.name for p in (tmp_path / "g").iterdir() if p.name[0] != ".") == ["plan_glare.json",
                                                                                       "plan_glare_sweep.png"]
    assert json.loads((tmp_path / "g" / "plan_glare.json").read_text()) == json.loads(json.dumps(r))
    assert r["contrast_gain"] > r["contrast_gain_ideal"] * 0.9 and r["contrast_gain"] > 1


def test_index_instead_of_surface():
    r = run_plan_glare(index=1.5, incidence_deg=40, roll_deg=8)
    assert r["surface"] is None and r["index"] == 1.5 and r["best_angle_deg"] == 98.0 and r["outputs"] is None


def test_ring_reading(tmp_path):
    from tests.tasks.test_calibrate_ring import reference_bracket
    from polarsky.tasks.calibrate_ring import run_calibrate_ring

    ring = run_calibrate_ring(reference_bracket(tmp_path / "in", offset_deg=7.0), tmp_path / "ring", region="0,0,60,40")
    r = run_plan_glare(surface="water", incidence_deg=53, calibration=str(tmp_path / "ring"))
    assert r["best_ring_reading_deg"] == pytest.approx((90.0 - ring["ring_offset_deg"]) % 180, abs=1e-3)


@pytest.mark.parametrize("options, match", [
    ({"surface": "water"}, "--incidence-deg is required"),
    ({"incidence_deg": 40}, "give either --surface"),
    ({"surface": "water", "index": 1.3, "incidence_deg": 40}, "not both"),
])
def test_missing_or_conflicting(options, match):
    with pytest.raises(InputError, match=match):
        run_plan_glare(**options)
