"""REGRESSION values: numbers our own code produced (2026-12-01) for a fixed invented scene.

These are not validation against outside sources (see tests/sky/test_sun.py, tests/sky/test_models.py,
tests/sky/test_features.py, tests/geometry/test_polarizer.py for those); they only guard against
unintended changes.  Update them deliberately when the method changes.
"""

import pytest

from polarsky.options.settings import Settings
from polarsky.tasks.calibrate_sky import fit_sky_calibration
from polarsky.tasks.sky import run_sky
from tests.sky_scene import PLACE  # the invented scene of the round-trip tests
from tests.sky_scene import geom as _geom
from tests.sky_scene import products as _products

GEO = dict(hfov_deg=70, pitch_deg=25, roll_deg=4, pictures=False, **PLACE)


def test_regression_dolp_max_and_residuals(tmp_path):
    r = run_sky([], tmp_path / "a", stokes=_products(_geom(), noise_sigma=0.002, seed=5), yaw_deg=10, **GEO)
    assert r["dolp_max"] == pytest.approx(0.7503118391485966, abs=1e-6)
    assert r["rms_aolp_residual_deg"] == pytest.approx(0.44275463798995607, abs=1e-4)
    assert r["rms_dolp_residual"] == pytest.approx(0.00994371799395417, abs=1e-6)
    assert r["sky_pixels"] == 2856


def test_regression_solved_yaw(tmp_path):
    r = run_sky([], tmp_path / "b", stokes=_products(_geom(), noise_sigma=0.002, seed=5), yaw_deg=50, solve="yaw",
                **GEO)
    assert r["yaw_deg"] == pytest.approx(10.011930646112765, abs=1e-3)


def test_regression_sky_calibration_offset(tmp_path):
    geo = {k: v for k, v in GEO.items() if k != "pictures"}
    _, c = fit_sky_calibration(None, Settings.from_options(dict(yaw_deg=10, **geo)),
                               stokes=[_products(_geom(), noise_sigma=0.002, seed=5, analyzer_offset_deg=2.5)])
    assert c["angle_offset_deg"][0] == pytest.approx(2.5022920648843865, abs=1e-4)
