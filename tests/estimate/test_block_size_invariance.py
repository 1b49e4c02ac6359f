"""Every Stokes product is the same whatever the row-block size (1 row, 7 rows, the whole frame).

The runner reads each block with the context rows the 5x5 smoothing of the residual-based
variance needs, and a mosaic source decodes a window with its method's context, so a pixel's
products do not depend on where a block starts. Checked bit for bit (these are properties of
our own code, not values from an outside source).
"""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.estimate.block import PRODUCTS
from polarsky.estimate.runner import run_blocks
from polarsky.estimate.sinks import MemorySink
from polarsky.options.settings import Settings
from polarsky.tasks._common import open_source
from tests.synth import render_frames, smooth_scene, write_pngs


def _products(frames, options, rows, compiled):
    op = open_source(frames, Settings.from_options(options), compiled=compiled)
    src = op.source
    names = [n for n in PRODUCTS if n != "residual" or src.n_analyzers > 3]
    sink = MemorySink(src.shape, len(src.channels), names)
    run_blocks(src, op.noise, [sink], rows=rows)
    return sink.arrays


def _assert_identical(a, b):
    assert a.keys() == b.keys()
    for k in a:
        np.testing.assert_array_equal(a[k], b[k], err_msg=k)


def _check(frames, options, compiled):
    whole = _products(frames, options, 10**6, compiled)
    for rows in (1, 7):
        _assert_identical(_products(frames, options, rows, compiled), whole)
    return whole


@pytest.mark.parametrize("compiled", [False, True])
@pytest.mark.parametrize("angles", [(0, 45, 90, 135), (0, 60, 120), (0, 30, 60, 90, 120, 150)])
def test_bracket_products_do_not_depend_on_the_block_size(tmp_path, angles, compiled):
    s = smooth_scene(23, 17, channels=3)
    frames = write_pngs(tmp_path, render_frames(s, angles, noise=0.004), angles, bits=16)
    out = _check(frames, {}, compiled)
    assert np.isfinite(out["sigma_dolp"][out["valid"]]).all()


def _mosaic_file(tmp_path, h, w, colour=None):
    from polarsky.mosaic.layout import parse_mosaic
    from polarsky.synthetic.mosaic import mosaic_sample, scene_edges, write_mosaic_png

    raw = mosaic_sample(scene_edges(h, w), parse_mosaic("90,45;135,0", colour))
    rng = np.random.default_rng(4)
    raw = np.clip(raw + rng.normal(0, 0.003, raw.shape), 0, 1).astype(np.float32)
    path = tmp_path / "mosaic.png"
    write_mosaic_png(path, raw, bits=16)
    return [path]


@pytest.mark.parametrize("compiled", [False, True])
@pytest.mark.parametrize("method", ["superpixel", "bilinear", "newton"])
def test_mono_mosaic_products_do_not_depend_on_the_block_size(tmp_path, method, compiled):
    _check(_mosaic_file(tmp_path, 36, 28), {"mosaic": "90,45;135,0", "demosaic": method}, compiled)


@pytest.mark.parametrize("method", ["superpixel", "bilinear", "newton"])
def test_colour_mosaic_products_do_not_depend_on_the_block_size(tmp_path, method):
    opts = {"mosaic": "90,45;135,0", "mosaic_colour": "RGGB", "demosaic": method}
    _check(_mosaic_file(tmp_path, 40, 32, "RGGB"), opts, compiled=False)


@pytest.mark.parametrize("method", ["bilinear", "newton"])
def test_flat_calibrated_mosaic_products_do_not_depend_on_the_block_size(tmp_path, method):
    from polarsky.estimate.calibration import Calibration
    from polarsky.write.calibration_file import write_calibration

    h, w = 36, 28
    rng = np.random.default_rng(2)
    nominal = np.tile(np.array([[90.0, 45.0], [135.0, 0.0]]), (h // 2, w // 2))
    cal = Calibration(kind="flat", pixel={
        "pixel_gain": (1 + 0.05 * rng.standard_normal((1, h, w))).astype(np.float32),
        "pixel_diattenuation": np.full((1, h, w), 0.98, np.float32),
        "pixel_angle_deg": (nominal + rng.normal(0, 1.0, (h, w)))[None].astype(np.float32)},
        attrs={"mosaic": "90,45;135,0", "sensor_shape": [h, w]})
    cal_path = write_calibration(tmp_path / "calibration.nc", cal)
    opts = {"mosaic": "90,45;135,0", "demosaic": method, "calibration": str(cal_path)}
    _check(_mosaic_file(tmp_path, h, w), opts, compiled=False)
