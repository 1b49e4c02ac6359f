"""The unevenness of a darkening map, in words (synthetic maps with a known answer)."""

from __future__ import annotations

import numpy as np

from polarsky.plan.unevenness import describe_unevenness, where_in_frame


def test_left_to_right_ramp():
    h, w = 60, 90
    stops = np.tile(np.linspace(1.5, 0.0, w), (h, 1))
    scat = np.tile(np.linspace(80.0, 140.0, w), (h, 1))     # the 90-degree band crosses the left third
    sky = np.ones((h, w), bool)
    r = describe_unevenness(stops, sky, scat)
    t = r["darkening_stops_thirds"]
    assert t["left"] > t["center"] > t["right"]
    assert r["unevenness_text"].startswith("the left third darkens 1.3 stops, the centre 0.8, the right third 0.2")
    assert r["darkest_px"][0] < 5 and r["band_90_in_frame"] is True
    assert "runs top to bottom" in r["unevenness_text"]


def test_even_sky_and_a_band_beyond_the_edge():
    h, w = 40, 60
    stops = np.full((h, w), 0.8)
    scat = np.tile(np.linspace(100.0, 130.0, w), (h, 1))    # the whole frame is farther than 90 deg
    r = describe_unevenness(stops, np.ones((h, w), bool), scat)
    assert r["unevenness_text"].startswith("even across the frame")
    assert r["band_90_in_frame"] is False and r["band_90_center_px"] is None
    assert "beyond the left edge of the frame (10 deg past it)" in r["unevenness_text"]


def test_where_in_frame():
    assert where_in_frame(5, 5, 90, 60) == "upper left"
    assert where_in_frame(85, 55, 90, 60) == "lower right"
    assert where_in_frame(45, 5, 90, 60) == "top centre"
