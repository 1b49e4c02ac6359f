"""Glare planning against handbook Fresnel values (Hecht) and closed forms."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.core.refractive_index import WATER
from polarsky.plan.glare import glare_plan, glare_sweep, stops_removed


def test_normal_incidence_glass_four_percent():
    # Hecht, Optics (5th ed. 2017) sec. 4.6: R = ((n-1)/(n+1))^2 = 0.04 at normal incidence, n = 1.5.
    r = glare_plan(1.5, 0.0)
    assert r["rs"] == pytest.approx(0.04, abs=1e-12) and r["rp"] == pytest.approx(0.04, abs=1e-12)
    assert r["reflection_dolp"] == 0.0 and r["reduction_stops_ideal"] == 0.0


@pytest.mark.parametrize("n, brewster", [
    # Hecht (2017) sec. 8.6 / IUPAC Gold Book "Brewster angle": tan(theta_B) = n; 56.3 deg for
    # n = 1.5 and 53.1 deg for water (n = 1.333); the printed one-decimal values.
    (1.5, 56.3),
    (1.333, 53.1),
])
def test_brewster_angle_handbook(n, brewster):
    r = glare_plan(n, 30.0)
    assert r["brewster_deg"] == pytest.approx(brewster, abs=0.05)
    at = glare_plan(n, float(np.degrees(np.arctan(n))))
    assert at["rp"] == pytest.approx(0.0, abs=1e-12)          # Rp = 0 at Brewster (Hecht 2017, sec. 8.6)
    assert at["reflection_dolp"] == pytest.approx(1.0, abs=1e-12)
    assert at["reduction_stops_ideal"] is None                 # an ideal filter removes all of it


def test_water_table_brewster_about_53():
    # IUPAC Gold Book: Brewster angle of water about 53 deg; the IAPWS water of the table (1.33298).
    assert glare_plan(WATER.index, 30)["brewster_deg"] == pytest.approx(53.12, abs=0.01)


@pytest.mark.parametrize("theta, rs_ref, rp_ref, p_ref", [
    # Fresnel reflectances, air -> glass n = 1.5, from Hecht's equations (4.42-4.45), tabulated in
    # the project references [X]; tolerance 1e-6 (the table's 6 decimals).
    (20.0, 0.047081, 0.033452, 0.169241),
    (45.0, 0.092013, 0.008466, 0.831479),
    (60.0, 0.176571, 0.001802, 0.979796),
    (80.0, 0.538595, 0.236814, 0.389190),
])
def test_glass_reflectance_table(theta, rs_ref, rp_ref, p_ref):
    r = glare_plan(1.5, theta)
    assert r["rs"] == pytest.approx(rs_ref, abs=1e-6)
    assert r["rp"] == pytest.approx(rp_ref, abs=1e-6)
    assert r["reflection_dolp"] == pytest.approx(p_ref, abs=1e-6)


def test_reduction_is_malus_with_a_partial_polarizer():
    # A partial polarizer of diattenuation D = (ER-1)/(ER+1) passes 1/2 (1 - D P) of light of DoLP P
    # at the crossed setting (Chipman, Lam & Young 2018, ch. 5; Collett 2005 p. 12): at Brewster
    # (P = 1) that is 1/(ER+1), i.e. log2((ER+1)/2) stops below the mean over a turn.
    d = 299 / 301
    r = glare_plan(1.5, 30.0, diattenuation=d, extinction=300)
    assert r["brewster_reduction_stops"] == pytest.approx(np.log2(301 / 2), abs=1e-4)
    p = r["reflection_dolp"]
    assert r["reduction_stops"] == pytest.approx(-np.log2(1 - d * p), abs=1e-4)
    assert r["reduction_stops_ideal"] == pytest.approx(-np.log2(1 - p), abs=1e-4)
    assert stops_removed(0.5) == pytest.approx(1.0)


def test_best_axis_in_the_plane_of_incidence():
    # The reflected excess is s-polarized (perpendicular to the plane of incidence, Hecht 2017
    # sec. 8.6): for a level surface the filter axis is vertical (90 deg); with the camera rolled by
    # r the horizon, and so the axis, turns by +r in the image (project convention).
    assert glare_plan(1.333, 60)["best_angle_deg"] == 90.0
    assert glare_plan(1.333, 60, roll_deg=8.0)["best_angle_deg"] == 98.0


def test_contrast_gain_limits():
    # Closed form: the share of light from behind rises from F to F / (F + (1-F)(1-DP)).
    p = glare_plan(1.333, 60)["reflection_dolp"]
    r = glare_plan(1.333, 60, behind_fraction=0.25)
    assert r["behind_fraction_filtered"] == pytest.approx(0.25 / (0.25 + 0.75 * (1 - p)), abs=5e-6)
    assert glare_plan(1.333, 60, behind_fraction=1.0)["contrast_gain"] == pytest.approx(1.0)
    assert glare_plan(1.333, 60, behind_fraction=1e-6)["contrast_gain"] == pytest.approx(1 / (1 - p), rel=1e-4)


def test_ninety_percent_range_brackets_brewster():
    # Hecht (2017) sec. 8.6: the reflection's DoLP peaks (= 1) at Brewster's angle.
    lo, hi = glare_plan(1.5, 40.0)["incidence_range_90pct_polarized_deg"]
    assert lo < 56.31 < hi


def test_sweep_rows_and_limits():
    # Hecht (2017): DoLP 0 at normal incidence, 1 at Brewster's angle; R -> 1 at grazing incidence.
    rows = glare_sweep(1.5, [0, 56.309932474020215, 90])
    assert rows[0]["reflection_dolp"] == 0 and rows[1]["reduction_stops_ideal"] is None
    assert rows[2]["rs"] == pytest.approx(1.0) and rows[2]["reflection_dolp"] == pytest.approx(0.0, abs=1e-12)
