"""The angle of incidence from a region's DoLP (advise --surface) against the Fresnel equations (Hecht)."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.advice.result import advice_result, advice_text
from polarsky.advice.surface import resolve_surface, surface_estimate
from polarsky.core.fresnel import incidence_from_dolp, reflected_dolp
from polarsky.errors import InputError
from polarsky.read.masks import parse_region


@pytest.mark.parametrize("theta", [20.0, 30.0, 45.0, 70.0, 80.0])
def test_inverse_recovers_both_solutions(theta):
    # The reflection's DoLP (Rs - Rp)/(Rs + Rp) from Hecht (2017) eqs. 4.42-4.45 gives back its incidence
    # as one of two solutions, the other on the far side of Brewster's angle tan(theta_B) = n (sec. 8.6).
    n = 1.333
    lo, hi = incidence_from_dolp(float(reflected_dolp(theta, 1.0, n)), n)
    b = np.degrees(np.arctan(n))
    assert lo < b < hi
    assert min(abs(lo - theta), abs(hi - theta)) < 1e-4


def test_fully_polarized_is_brewster():
    # Hecht (2017) sec. 8.6: only at Brewster's angle is the reflection fully polarized (53.1 deg, water).
    lo, hi = incidence_from_dolp(1.0, 1.333)
    assert lo == hi == pytest.approx(53.1, abs=0.05)


def test_surface_estimate_with_pitch():
    # A camera pitched -25 deg sees a level surface at 65 deg of incidence (geometry), above Brewster's
    # 53.12 deg for the IAPWS water of the table (IUPAC Gold Book, "Brewster angle": about 53 deg).
    est = surface_estimate(0.5, resolve_surface("water"), pitch_deg=-25.0)
    lo, hi = est["incidence_solutions_deg"]
    assert est["incidence_from_pitch_deg"] == 65.0 and est["favoured_incidence_deg"] == hi
    assert est["tilt_to_brewster_from_pitch_deg"] == pytest.approx(53.12 - 65.0, abs=0.01)
    assert any("between the two solutions" in n for n in est["notes"])


def test_surface_estimate_without_pitch_and_off_horizontal():
    est = surface_estimate(0.5, resolve_surface(index=1.5), region_aolp_deg=40.0)
    assert est["incidence_from_pitch_deg"] is None and est["surface"] is None
    assert any("give --pitch-deg" in n for n in est["notes"]) and any("+40 deg" in n for n in est["notes"])


def test_resolve_surface_needs_exactly_one():
    with pytest.raises(InputError, match="either --surface"):
        resolve_surface()
    with pytest.raises(InputError, match="not both"):
        resolve_surface("water", 1.3)


def test_advice_result_carries_the_estimate_and_the_ring():
    # A region of DoLP 0.6 at AoLP 0 (a level reflection): the estimate and the ring reading are part of
    # the one advice result (advise --json, advice.json and the workbench share it).
    region = parse_region("0,0,4,4")
    sums = {"region": np.array([100.0, 60.0, 0.0])}
    r = advice_result(sums, {"region": 16}, region=region, analyzer_angles_deg=[0, 45, 90, 135], inputs=[],
                      angle_offset_deg=7.0, ring={"ring_offset_deg": 7.0, "ring_offset_sigma_deg": 0.05},
                      calibration={"file": "ring/calibration.nc", "kind": "ring", "created": None,
                                   "applied": ["angle offset"], "per_pixel": False},
                      surface=resolve_surface("water"), pitch_deg=-30.0)
    assert r["best_angle_deg"] == 90.0 and r["best_ring_reading_deg"] == 83.0
    assert r["surface_estimate"]["favoured_incidence_deg"] == r["surface_estimate"]["incidence_solutions_deg"][1]
    text = advice_text(r)
    assert "On your filter ring: set it to 83.0" in text and "ring/calibration.nc" in text
    assert "fits two angles of incidence on water" in text
