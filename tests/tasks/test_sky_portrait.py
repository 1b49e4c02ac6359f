"""A portrait frame in the sky comparison: the sensor's width lies along the displayed height.

A pinhole focal length in pixels is ``f_mm * width_px / sensor_width_mm`` across the sensor's
width (common practice); a frame shown turned a quarter (Orientation 5..8) has that width as
its displayed height.
"""

import numpy as np
import pytest

from polarsky.options.settings import Settings
from polarsky.tasks.sky import prepare_sky
from tests.sky_scene import PLACE
from tests.sky_scene import geom as _geom
from tests.sky_scene import products as _products


@pytest.mark.parametrize("orientation, along", [(1, "width"), (6, "height"), (8, "height"), (3, "width")])
def test_focal_from_mm_uses_the_sensor_width_as_displayed(orientation, along):
    prods = _products(_geom())
    prods["attrs"] = {"orientation": orientation}
    settings = Settings.from_options({"focal_mm": 24, "sensor_width_mm": 36, "yaw_deg": 10, "pitch_deg": 25,
                                      "roll_deg": 4, **PLACE})
    _, geom, info = prepare_sky([], settings, stokes=prods)
    c, h, w = prods["dolp"].shape
    want = 24 * (w if along == "width" else h) / 36
    assert info["lens"]["focal_px"] == pytest.approx(want)
    assert np.isfinite(info["lens"]["focal_px"])
