"""The row-block runner: every product, uncertainties included, is the same for any block size
and whichever other products are computed with it.

Brackets and mosaic frames (mono fast paths, flat-calibrated and colour) are estimated with
blocks of 1 and 7 rows and with the whole frame, on the compiled kernels and on the numpy
reference; the two builds agree with each other too.
"""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.estimate.runner import run_blocks
from polarsky.estimate.sinks import MemorySink
from polarsky.options.settings import Settings
from polarsky.tasks._common import open_source
from tests.synth import render_frames, smooth_scene, write_tiffs

NAMES = ("S0", "S1", "S2", "dolp", "dolp_unbiased", "aolp", "sigma_dolp", "sigma_aolp", "residual", "valid")


def _products(frames, settings, rows, compiled, names=NAMES):
    op = open_source(frames, settings, compiled=compiled)
    src = op.source
    names = [n for n in names if n != "residual" or src.n_analyzers > 3]
    mem = MemorySink(src.shape, len(src.channels), names)
    info = run_blocks(src, op.noise, [mem], rows=rows, compiled=compiled)
    assert info["compiled"] is compiled
    return mem.arrays, info


def _same_for_every_block_size(frames, settings, compiled):
    """Products for blocks of 1 and 7 rows equal those of the whole frame, bit for bit.

    Also on the compiled kernels: their fast-math policy leaves out contraction and
    reassociation, so a pixel rounds alike whether a vectorized loop body or its scalar
    remainder computes it (polarsky/core/kernels/policy.py).
    """
    h = open_source(frames, settings).source.shape[0]
    whole, info = _products(frames, settings, h, compiled)
    for rows in (1, 7):
        part, _ = _products(frames, settings, rows, compiled)
        for name in whole:
            np.testing.assert_array_equal(part[name], whole[name], err_msg=f"{name}, {rows} rows")
    # products computed only when a sink needs them are the same as when all are computed
    for subset in (("S0", "S1", "S2", "valid"), ("dolp", "aolp", "residual"), ("sigma_aolp",)):
        part, _ = _products(frames, settings, 7, compiled, names=subset)
        for name in part:
            np.testing.assert_array_equal(part[name], whole[name], err_msg=f"{name} needed alone")
    return whole, info


@pytest.mark.parametrize("angles, channels, options", [
    ((0, 45, 90, 135), 1, {}),                          # residual-based variance (5x5 smoothing)
    ((0, 60, 120), 1, {}),                              # noise model
    ((5, 40, 80, 120, 160), 3, {"extinction": 300}),   # colour, 5 frames, filter model
    ((0, 45, 90, 135), 1, {"noise": "model", "gain_e_per_dn": 2.0}),
    (tuple(range(0, 180, 20)), 1, {}),                  # 9 frames: no compiled solve pass, the reference fit
])
def test_bracket_products_do_not_depend_on_block_size(tmp_path, angles, channels, options):
    s = smooth_scene(23, 17, channels=channels)
    frames = render_frames(s, angles, noise=0.003, seed=2)
    frames[1, :, 4, 5] = 1.0  # a saturated pixel: not valid
    paths = write_tiffs(tmp_path, frames, angles)
    settings = Settings.from_options(options)
    ref, info = _same_for_every_block_size(paths, settings, compiled=False)
    assert info["noise_source"] == ("residual" if len(angles) > 3 and not options.get("noise") else "model")
    fast, _ = _same_for_every_block_size(paths, settings, compiled=True)
    assert not ref["valid"][:, 4, 5].any()
    for name in ref:
        np.testing.assert_allclose(fast[name], ref[name], rtol=2e-4, atol=2e-6, equal_nan=True, err_msg=name)


def _flat_sensor(h, w, layout):
    """An invented mosaic sensor (orientation errors, ER 50..300, gains +-10 %) and its bench fit."""
    from polarsky.mosaic.flatcal import fit_flat
    from polarsky.synthetic.mosaic import bench_frames

    rng = np.random.default_rng(0)
    angle = np.tile(layout.grid, (h // 2, w // 2)) + rng.normal(0, 2.0, (h, w))
    er = rng.uniform(50, 300, (h, w))
    dia, gain = (er - 1) / (er + 1), rng.uniform(0.9, 1.1, (h, w))
    ref_angles = np.arange(0.0, 180.0, 15.0)
    fit = fit_flat(bench_frames((h, w), layout, ref_angles, angle_deg=angle, diattenuation=dia, gain=gain),
                   ref_angles, layout)
    return fit, angle, dia, gain


@pytest.mark.parametrize("method", ["superpixel", "bilinear", "newton"])
@pytest.mark.parametrize("colour, flat", [(None, False), (None, True), ("GRBG", True)])
def test_mosaic_products_do_not_depend_on_block_size(tmp_path, method, colour, flat):
    from polarsky.mosaic.flatcal import flat_calibration
    from polarsky.mosaic.layout import parse_mosaic
    from polarsky.synthetic.mosaic import mosaic_sample, scene_edges, write_mosaic_png
    from polarsky.write.calibration_file import write_calibration

    h, w, cell = 24, 32, "90,45;135,0"
    lay = parse_mosaic(cell, colour)
    scene = scene_edges(h, w) if colour is None else np.stack([scene_edges(h, w) * f for f in (0.5, 1, 0.8)])
    options = {"mosaic": cell, "mosaic_color": colour, "demosaic": method}
    if flat:
        fit, angle, dia, gain = _flat_sensor(h, w, parse_mosaic(cell))
        raw = mosaic_sample(scene, lay, angle_deg=angle, diattenuation=dia, gain=gain)
        cal = flat_calibration(fit)
        cal.attrs["mosaic_color"] = colour
        options["calibration"] = write_calibration(tmp_path / "calibration.nc", cal)
    else:
        raw = mosaic_sample(scene, lay)
    noisy = raw + np.random.default_rng(3).normal(0, 0.002, raw.shape)
    frame = write_mosaic_png(tmp_path / "cam.png", np.clip(noisy, 0.001, 0.97))
    settings = Settings.from_options(options)
    ref, _ = _same_for_every_block_size([frame], settings, compiled=False)
    fast, _ = _same_for_every_block_size([frame], settings, compiled=True)
    for name in ref:
        np.testing.assert_allclose(fast[name], ref[name], rtol=2e-4, atol=2e-5, equal_nan=True, err_msg=name)
