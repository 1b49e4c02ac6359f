"""Fresnel reflection against handbook values (used by the demo scene and glare advice)."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.core.fresnel import brewster_angle_deg, fresnel_reflectance, reflected_dolp, reflection_stokes


def test_brewster_angles():
    # IUPAC Gold Book "Brewster angle": tan(theta_B) = n2/n1; water about 53 deg, glass n = 1.5
    # about 56 deg (LibreTexts, Tatum, Physical Optics 2.4); 53.1232 and 56.3099 recomputed [X].
    assert brewster_angle_deg(1.0, 1.333) == pytest.approx(53.1232, abs=1e-4)
    assert brewster_angle_deg(1.0, 1.5) == pytest.approx(56.3099, abs=1e-4)
    rs, rp = fresnel_reflectance(brewster_angle_deg(1.0, 1.5), 1.0, 1.5)
    assert rp == pytest.approx(0.0, abs=1e-15)
    assert reflected_dolp(brewster_angle_deg(1.0, 1.5), 1.0, 1.5) == pytest.approx(1.0)


def test_normal_incidence_and_textbook_exercise():
    # R0 = ((n-1)/(n+1))^2 = 0.04 for n = 1.5 (Hecht, Optics 5th ed. 2017, sec. 4.6.2).
    rs, rp = fresnel_reflectance(0.0, 1.0, 1.5)
    assert rs == pytest.approx(0.04) and rp == pytest.approx(0.04)
    # Natural light on glass (n = 1.5) at 40 deg: Rs = 0.077158, Rp = 0.014310, P = 0.6871
    # (an exercise of the Hecht kind, from memory; values recomputed from the Fresnel equations [X]).
    rs, rp = fresnel_reflectance(40.0, 1.0, 1.5)
    assert rs == pytest.approx(0.077158, abs=2e-6)
    assert rp == pytest.approx(0.014310, abs=2e-6)
    assert reflected_dolp(40.0, 1.0, 1.5) == pytest.approx(0.6871, abs=1e-4)


@pytest.mark.parametrize("theta, rs_w, rp_w, p_w", [
    # air -> water n = 1.333, recomputed from Hecht's equations [X] (project reference table)
    (30.0, 0.030934, 0.011939, 0.443055),
    (60.0, 0.115068, 0.004314, 0.927729),
    (80.0, 0.457017, 0.238816, 0.313583),
])
def test_water_table(theta, rs_w, rp_w, p_w):
    rs, rp = fresnel_reflectance(theta, 1.0, 1.333)
    assert rs == pytest.approx(rs_w, abs=1e-6)
    assert rp == pytest.approx(rp_w, abs=1e-6)
    assert reflected_dolp(theta, 1.0, 1.333) == pytest.approx(p_w, abs=1e-6)


def test_reflected_e_vector_lies_along_s_axis():
    # The reflected excess is polarized perpendicular to the plane of incidence (Hecht 2017, sec. 8.6).
    out = reflection_stokes([1.0, 0.0, 0.0], 53.0, 30.0)
    aolp = np.degrees(0.5 * np.arctan2(out[2], out[1])) % 180
    assert aolp == pytest.approx(30.0, abs=1e-9)
