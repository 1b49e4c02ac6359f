"""Colour mosaic sensors: 2x2 polarizer cells inside a Bayer pattern of cells (4x4 period)."""

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.estimate.calibration import Calibration
from polarsky.mosaic.layout import BAYER_ORDERS, parse_mosaic
from polarsky.registries import DEMOSAIC_METHODS
from polarsky.synthetic.mosaic import mosaic_sample, scene_uniform
from polarsky.tasks.stokes import stokes_from_files, stokes_from_mosaic_values

H, W = 48, 64
LAY = "90,45;135,0"
FACT = (0.4, 1.0, 0.7)


def _colour_scene(dolp=(0.2, 0.4, 0.6), aolp=(10.0, 50.0, 140.0)):
    return np.stack([scene_uniform(H, W, s0=0.6 * f, dolp=d, aolp_deg=a) for f, d, a in zip(FACT, dolp, aolp)])


@pytest.mark.parametrize("order", BAYER_ORDERS)
@pytest.mark.parametrize("method", list(DEMOSAIC_METHODS))
def test_uniform_colour_scene_exact(order, method):
    s = _colour_scene()
    raw = mosaic_sample(s, parse_mosaic(LAY, order), dtype=np.float64)
    ds = stokes_from_mosaic_values(raw, mosaic=LAY, mosaic_color=order, demosaic=method)
    assert list(ds.channel.values) == ["R", "G", "B"]
    k = DEMOSAIC_METHODS[method].scale
    assert ds.sizes["y"] == H // k and ds.sizes["x"] == W // k
    for c, (f, d, a) in enumerate(zip(FACT, (0.2, 0.4, 0.6), (10.0, 50.0, 140.0))):
        np.testing.assert_allclose(ds.S0.values[c], 0.6 * f, atol=1e-5)
        np.testing.assert_allclose(ds.dolp.values[c], d, atol=1e-5)
        np.testing.assert_allclose(ds.aolp.values[c], a, atol=1e-3)
    assert ds.attrs["mosaic_color"] == order


def test_colour_frame_not_multiple_of_four():
    raw = np.full((H, W - 2), 0.3, np.float32)
    with pytest.raises(InputError, match="not a multiple of the 4x4 colour mosaic"):
        stokes_from_mosaic_values(raw, mosaic=LAY, mosaic_color="RGGB")


def test_colour_sky_offsets_per_position_and_channel(tmp_path):
    from polarsky.write.calibration_file import write_calibration

    lay = parse_mosaic(LAY, "RGGB")
    off = np.array([[2.0, 1.0, -1.0], [-3.0, 0.5, 2.0], [1.0, -1.5, 0.0], [0.5, 2.5, -2.0]])  # (position, channel)
    s = _colour_scene()
    # render each colour with its own per-position angles
    cc = np.tile(np.repeat(np.repeat(np.array([[0, 1], [1, 2]]), 2, 0), 2, 1), (H // 4, W // 4))
    pos = np.tile(np.arange(4).reshape(2, 2), (H // 2, W // 2))
    ang = np.asarray(lay.angles_deg)[pos] + off[pos, cc]
    raw = mosaic_sample(s, lay, angle_deg=ang, dtype=np.float64)
    cal = write_calibration(tmp_path / "calibration.nc", Calibration(kind="sky", angle_offset_deg=off))
    ds = stokes_from_mosaic_values(raw, mosaic=LAY, mosaic_color="RGGB", demosaic="superpixel", calibration=cal)
    np.testing.assert_allclose(ds.aolp.values[:, 0, 0], [10.0, 50.0, 140.0], atol=1e-3)


def test_colour_edge_keeps_colours_apart():
    # a red/blue boundary: far from it each side keeps its own colour (colour demosaic is local)
    s = _colour_scene()
    s[:, :, :, W // 2:] *= np.array([0.1, 1, 3.0])[:, None, None, None]
    raw = mosaic_sample(s, parse_mosaic(LAY, "RGGB"), dtype=np.float64)
    ds = stokes_from_mosaic_values(raw, mosaic=LAY, mosaic_color="RGGB", demosaic="bilinear")
    np.testing.assert_allclose(ds.S0.values[:, 20, 8], s[:, 0, 20, 8], rtol=1e-5)
    np.testing.assert_allclose(ds.S0.values[:, 20, W - 8], s[:, 0, 20, W - 8], rtol=1e-5)


def test_colour_mosaic_from_file(tmp_path):
    from polarsky.synthetic.mosaic import write_mosaic_png

    p = write_mosaic_png(tmp_path / "c.png", mosaic_sample(_colour_scene(), parse_mosaic(LAY, "BGGR")))
    ds = stokes_from_files([p], mosaic=LAY, mosaic_color="bggr", demosaic="newton")
    assert list(ds.channel.values) == ["R", "G", "B"] and ds.attrs["mosaic_color"] == "BGGR"
    np.testing.assert_allclose(ds.dolp.values[:, 5, 5], [0.2, 0.4, 0.6], atol=2e-3)


@pytest.mark.parametrize("order", BAYER_ORDERS)
def test_colour_bilinear_exact_on_affine_fields_interior(order):
    # the bilinear rule of REFERENCES.md 8.1 applied on each (colour, orientation) lattice:
    # period-4 tents for R and B, G cells filled then bilinear -> affine fields exact inside
    y, x = np.mgrid[0:H, 0:W].astype(np.float64)
    s = np.stack([1 + 0.01 * x + 0.02 * y, 0.1 + 0.003 * x - 0.002 * y, -0.05 + 0.001 * x + 0.004 * y])
    s3 = np.stack([s * f for f in FACT])
    lay = parse_mosaic(LAY, order)
    ds = stokes_from_mosaic_values(mosaic_sample(s3, lay, dtype=np.float64), mosaic=LAY, mosaic_color=order)
    for i, name in enumerate(("S0", "S1", "S2")):
        np.testing.assert_allclose(ds[name].values[:, 4:-4, 4:-4], s3[:, i, 4:-4, 4:-4], atol=2e-6)
