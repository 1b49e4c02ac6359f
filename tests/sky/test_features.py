"""Halo and rainbow radii against published sources (REFERENCES 4); the indices: tests/core/test_refractive_index.py."""

import numpy as np
import pytest

from polarsky.core.refractive_index import refractive_index_ice_warren2008, refractive_index_water_iapws1997
from polarsky.sky.features import (descartes_ray, feature_bands, halo_radius_deg, prism_minimum_deviation_deg,
                                   rainbow_radius_deg)


def test_halo_radii_tatum():
    # Tatum, Geometric Optics sec. 1.6: n = 1.31 gives 21.8 deg (A = 60) and 45.7 deg (A = 90)
    assert halo_radius_deg(1.31, 60) == pytest.approx(21.8, abs=0.05)
    assert halo_radius_deg(1.31, 90) == pytest.approx(45.7, abs=0.05)
    # formula check [X]: n = 1.3110 -> 21.9151 / 45.9490
    assert prism_minimum_deviation_deg(1.3110, 60) == pytest.approx(21.9151, abs=1e-4)
    assert prism_minimum_deviation_deg(1.3110, 90) == pytest.approx(45.9490, abs=1e-4)


def test_halos_from_warren_brandt_are_the_familiar_22_and_46():
    n = refractive_index_ice_warren2008(550)
    assert halo_radius_deg(n, 60) == pytest.approx(22.0, abs=0.5)
    assert halo_radius_deg(n, 90) == pytest.approx(46.0, abs=0.5)


def test_no_ray_through_prism_when_index_too_high():
    assert np.isnan(prism_minimum_deviation_deg(1.5, 90))


def test_descartes_rays_halliday_resnick_walker():
    # Halliday, Resnick & Walker, Fundamentals of Physics ch. 33 problem solution:
    # red n = 1.331: D1 = 137.63 deg at i = 59.52; blue n = 1.343: D2 = 233.48 deg at i = 71.52
    d1, i1, _ = descartes_ray(1.331, 1)
    assert d1 == pytest.approx(137.63, abs=0.01) and i1 == pytest.approx(59.52, abs=0.01)
    d2, i2, _ = descartes_ray(1.343, 2)
    assert d2 == pytest.approx(233.48, abs=0.01) and i2 == pytest.approx(71.52, abs=0.01)


def test_rainbow_radii_are_the_familiar_42_and_51():
    # REFERENCES 4.4 [X from the Descartes formulas]: n = 1.333 -> 42.0781 / 50.8908 deg
    assert rainbow_radius_deg(1.333, 1) == pytest.approx(42.0781, abs=1e-4)
    assert rainbow_radius_deg(1.333, 2) == pytest.approx(50.8908, abs=1e-4)
    n = refractive_index_water_iapws1997(0.55, 283.15, 999.7)
    assert rainbow_radius_deg(n, 1) == pytest.approx(42.0, abs=0.5)
    assert rainbow_radius_deg(n, 2) == pytest.approx(51.0, abs=0.7)


def test_feature_bands_contain_the_rings():
    bands = {b["name"]: b for b in feature_bands(sun_radius_deg=8)}
    assert bands["sun and aureole"]["outer_deg"] == 8
    for name, r in (("22-degree halo", 22), ("46-degree halo", 46), ("primary rainbow", 42),
                    ("secondary rainbow", 51)):
        b = bands[name]
        assert b["inner_deg"] < b["radius_deg"] < b["outer_deg"]
        assert abs(b["radius_deg"] - r) < 1.0
    assert bands["primary rainbow"]["about"] == "antisun"
