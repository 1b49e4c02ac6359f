"""The filter ring's zero from a region's sums (polarsky.advice.ring)."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.advice.ring import ring_offset_from_sums, ring_reading
from polarsky.errors import InputError


@pytest.mark.parametrize("source, aolp_ring, offset", [(0.0, 173.0, 7.0), (0.0, 23.0, -23.0), (30.0, 0.0, 30.0),
                                                       (90.0, 100.0, -10.0)])
def test_offset_is_source_minus_measured(source, aolp_ring, offset):
    # The estimate measures psi_ring = psi_true - offset (the offset is added to the ring readings,
    # as a calibration's angle_offset_deg is), so offset = psi_source - psi_ring mod 180 (Malus's law
    # in Stokes form, Collett 2005 p. 12: the AoLP is 1/2 atan2(S2, S1)).
    a = np.radians(2 * aolp_ring)
    r = ring_offset_from_sums([100.0, 60 * np.cos(a), 60 * np.sin(a)], var_s12=1.0, count=100, source_aolp_deg=source)
    assert (r["ring_offset_deg"] - offset + 90) % 180 - 90 == pytest.approx(0.0, abs=1e-3)
    assert -90 <= r["ring_offset_deg"] < 90
    assert r["region_dolp"] == pytest.approx(0.6)


def test_uncertainty_is_the_high_snr_aolp_scatter():
    # sigma_psi = sigma_S / (2 L) rad for the summed Stokes vector (Serkowski 1962, from memory).
    r = ring_offset_from_sums([100.0, 60.0, 0.0], var_s12=4.0, count=100)
    assert r["ring_offset_sigma_deg"] == pytest.approx(np.degrees(2.0 / (2 * 60.0)), abs=1e-4)


def test_spread_of_the_per_pixel_aolp():
    # Mean resultant length R = |sum L e^{2i psi}| / sum L of the doubled angles: the circular standard
    # deviation sqrt(-2 ln R) / 2 (Mardia & Jupp 2000, sec. 2.3.4; from memory). Equal weights at
    # psi = +-10 deg give R = cos 20 deg.
    r = ring_offset_from_sums([100.0, 60 * np.cos(np.radians(20)), 0.0], var_s12=1.0, count=100, lin_sum=60.0)
    assert r["region_aolp_spread_deg"] == pytest.approx(np.degrees(np.sqrt(-2 * np.log(np.cos(np.radians(20)))) / 2),
                                                        abs=1e-3)


def test_weak_or_noisy_references_are_refused():
    with pytest.raises(InputError, match="only 5.0% polarized"):
        ring_offset_from_sums([100.0, 5.0, 0.0], var_s12=0.0, count=10)
    with pytest.raises(InputError, match="uncertain by"):
        ring_offset_from_sums([10.0, 2.0, 0.0], var_s12=4.0, count=10)
    with pytest.raises(InputError, match="no valid pixels"):
        ring_offset_from_sums([0.0, 0.0, 0.0], var_s12=0.0, count=0)


def test_ring_reading():
    assert ring_reading(90.0, 7.5) == 82.5
    assert ring_reading(5.0, 10.0) == 175.0
