"""Regression values: numbers our own code produced for the demo scene.

These are NOT validation against outside sources; they only guard against unintended
changes.  Update them deliberately when the demo scene or the estimator changes.
"""

from __future__ import annotations

import pytest

from polarsky.synthetic.harbour import render_scene


def test_demo_truth_regression():
    truth = render_scene().truth()
    assert truth["region"]["best_angle_deg"] == pytest.approx(97.3, abs=0.2)
    assert truth["region"]["reduction_stops"] == pytest.approx(0.68, abs=0.02)
