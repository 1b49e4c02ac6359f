"""REGRESSION values (numbers our own code produced, not outside references).

RMS DoLP / AoLP errors of each decoding method on the synthetic 128x128 scenes of
``polarsky.synthetic.mosaic`` (the scoring of benchmarks/mosaic_accuracy.py: DoLP over all
pixels 4 sensor pixels from the border, AoLP where the true DoLP is at least 0.1;
``superpixel`` against the truth averaged over each 2x2 cell). They guard the methods against
unnoticed changes; a deliberate change of a method updates them.
"""

import numpy as np
import pytest

from polarsky.core.stokes import dolp_aolp
from polarsky.mosaic.decode import position_matrix
from polarsky.mosaic.fast import fast_fit
from polarsky.mosaic.layout import parse_mosaic
from polarsky.registries import DEMOSAIC_METHODS
from polarsky.synthetic.mosaic import SCENES, mosaic_sample

LAYOUT = "90,45;135,0"


def errors(scene, method):
    """(rms_dolp, rms_aolp_deg) of ``method`` on a (3, H, W) scene (decoded by the compiled fast path)."""
    lay = parse_mosaic(LAYOUT)
    h, w = scene.shape[-2:]
    s, _, _ = fast_fit(mosaic_sample(scene, lay), position_matrix(lay), method)
    k = DEMOSAIC_METHODS[method].scale
    truth = scene if k == 1 else scene.reshape(3, h // 2, 2, w // 2, 2).mean(axis=(2, 4))
    d, a = dolp_aolp(s.astype(np.float64))
    dt, at = dolp_aolp(truth)
    b = 4 // k
    sl = (slice(b, -b), slice(b, -b))
    da = ((a - at + 90) % 180 - 90)[sl]
    pol = dt[sl] >= 0.1
    return float(np.sqrt(np.mean((d - dt)[sl] ** 2))), float(np.sqrt(np.mean(da[pol] ** 2)))


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
