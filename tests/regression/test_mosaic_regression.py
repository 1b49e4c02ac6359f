"""REGRESSION values (numbers our own code produced, not outside references).

RMS DoLP / AoLP errors of each decoding method on the synthetic 128x128 scenes of
``polarsky.mosaic.synthetic`` (the scoring of benchmarks/mosaic_accuracy.py). They guard the
methods against unnoticed changes; a deliberate change of a method updates them.
"""

import os
import sys

import numpy as np
import pytest

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "benchmarks"))

from mosaic_accuracy import errors  # noqa: E402

from polarsky.mosaic.synthetic import SCENES  # noqa: E402

# regression: produced by this code at the commit that added the file
REGRESSION = {
    ("edges", "superpixel"): (0.0485173, 6.77129),
    ("edges", "bilinear"): (0.038706, 9.97946),
    ("edges", "newton"): (0.0179695, 2.1524),
    ("texture", "superpixel"): (0.11359, 19.318),
    ("texture", "bilinear"): (0.0715343, 11.3842),
    ("texture", "newton"): (0.0558349, 7.24488),
    ("gradient", "superpixel"): (0.00572313, 0.526502),
    ("gradient", "bilinear"): (0.000136831, 0.00622783),
    ("gradient", "newton"): (0.000766993, 0.0316986),
}


@pytest.mark.parametrize("scene, method", list(REGRESSION))
def test_regression_accuracy_table(scene, method):
    got = errors(SCENES[scene](128, 128), method)
    np.testing.assert_allclose(got, REGRESSION[(scene, method)], rtol=2e-3, atol=1e-6)
