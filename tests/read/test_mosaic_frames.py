"""Reading mosaic frames: containers, bit depths, black level, transfer, DNG, averaging."""

import json

import numpy as np
import pytest

from polarsky.core.transfer import srgb_to_linear
from polarsky.errors import InputError, PolarskyWarning
from polarsky.read.mosaic_frames import read_mosaic_frame, read_mosaic_stack
from polarsky.synthetic.mosaic import mosaic_sample, scene_uniform, write_mosaic_dng, write_mosaic_png
from polarsky.tasks.stokes import stokes_from_files

H, W = 48, 64
LAY = "90,45;135,0"


def _raw(dolp=0.4, aolp=25.0):
    return mosaic_sample(scene_uniform(H, W, s0=0.8, dolp=dolp, aolp_deg=aolp), LAY, dtype=np.float64)


def test_16bit_png_linear(tmp_path):
    raw = _raw()
    p = write_mosaic_png(tmp_path / "m.png", raw)
    v, inv, info = read_mosaic_frame(p)
    assert info["transfer"] == "linear" and info["bit_depth"] == 16 and not inv.any()
    np.testing.assert_allclose(v, raw, atol=1 / 65535)
    ds = stokes_from_files([p], mosaic=LAY, demosaic="superpixel")
    np.testing.assert_allclose(ds.dolp.values, 0.4, atol=1e-3)
    np.testing.assert_allclose(ds.aolp.values, 25.0, atol=0.1)


def test_8bit_png_is_srgb_by_default(tmp_path):
    # CONVENTIONS.md: 8-bit PNG is sRGB-encoded unless --transfer says otherwise
    raw = _raw()
    enc = np.where(raw <= 0.0031308, 12.92 * raw, 1.055 * raw ** (1 / 2.4) - 0.055)  # IEC 61966-2-1 encode
    p = write_mosaic_png(tmp_path / "m8.png", enc, bits=8)
    v, _, info = read_mosaic_frame(p)
    assert info["transfer"] == "srgb"
    np.testing.assert_allclose(v, raw, atol=0.01)
    v_lin, _, info = read_mosaic_frame(p, transfer="linear")
    assert info["transfer"] == "linear" and np.abs(v_lin - raw).max() > 0.05


def test_srgb_decode_check_value():
    # REFERENCES.md 7 [X]: decode(0.5) = 0.21404114 (IEC 61966-2-1:1999); mosaic frames use the
    # same transfer function as brackets (polarsky.core.transfer)
    np.testing.assert_allclose(srgb_to_linear(np.float32(0.5)), 0.21404114, atol=1e-6)


def test_12bit_in_16bit_container(tmp_path):
    raw = _raw()
    p = write_mosaic_png(tmp_path / "m12.png", raw, full=4095)
    v, _, info = read_mosaic_frame(p, bit_depth=12)
    assert info["white_level"] == 4095
    np.testing.assert_allclose(v, raw, atol=1 / 4095)
    # without --bit-depth the scale is the container's, Stokes ratios unchanged
    with pytest.warns(PolarskyWarning, match=r"only up to \d+: if the sensor delivers 12-bit data, give --bit-depth 12"):
        v16, _, _ = read_mosaic_frame(p)
    np.testing.assert_allclose(v16 * 65535 / 4095, v, rtol=1e-5)


def test_msb_aligned_12bit_is_shifted(tmp_path):
    import cv2

    counts = (np.round(_raw() * 4095).astype(np.uint16) << 4)
    cv2.imwrite(str(tmp_path / "msb.png"), counts)
    v, _, info = read_mosaic_frame(tmp_path / "msb.png", bit_depth=12)
    assert info["msb_shift"] == 4
    np.testing.assert_allclose(v, _raw(), atol=1 / 4095)


def test_values_above_bit_depth(tmp_path):
    p = write_mosaic_png(tmp_path / "m.png", _raw())
    with pytest.raises(InputError, match="above the 10-bit range"):
        read_mosaic_frame(p, bit_depth=10)


def test_black_level(tmp_path):
    raw = _raw()
    p = write_mosaic_png(tmp_path / "mb.png", raw, full=4095, black=256)
    v, _, info = read_mosaic_frame(p, bit_depth=12, black_level=256)
    np.testing.assert_allclose(v, raw, atol=2 / 4095)
    with pytest.raises(InputError, match="black level 5000 is outside"):
        read_mosaic_frame(p, bit_depth=12, black_level=5000)


def test_saturated_pixels_are_masked_with_a_count(tmp_path):
    raw = _raw()
    raw[10, 10] = 1.0
    p = write_mosaic_png(tmp_path / "sat.png", raw)
    with pytest.warns(PolarskyWarning, match="1 pixels saturated and 0 at the black level in sat.png were masked"):
        ds = stokes_from_files([p], mosaic=LAY, demosaic="bilinear")
    assert not bool(ds.valid.values[0, 10, 10]) and int((~ds.valid.values).sum()) == 9
    assert json.loads(ds.attrs["saturated_px"]) == [1] and json.loads(ds.attrs["black_px"]) == [0]


def test_dng_through_rawpy(tmp_path):
    raw = _raw()
    p = write_mosaic_dng(tmp_path / "m.dng", raw, white=4095, black=64)
    v, inv, info = read_mosaic_frame(p)
    assert info["format"] == "dng" and info["white_level"] == 4095 and info["black_level"] == 64
    np.testing.assert_allclose(v, raw, atol=1 / 4000)
    ds = stokes_from_files([p], mosaic=LAY)
    np.testing.assert_allclose(ds.dolp.values, 0.4, atol=2e-3)


def test_stack_is_averaged(tmp_path):
    rng = np.random.default_rng(5)
    raw = _raw()
    paths = [write_mosaic_png(tmp_path / f"n{i}.png", raw + rng.normal(0, 0.01, raw.shape)) for i in range(8)]
    one = read_mosaic_stack(paths[:1]).values
    avg = read_mosaic_stack(paths)
    assert avg.info["n_frames"] == 8
    assert np.std(avg.values - raw) < 0.5 * np.std(one - raw)
    ds = stokes_from_files(paths, mosaic=LAY)
    assert ds.attrs["frames"] == 8


def test_bad_files(tmp_path):
    import cv2

    with pytest.raises(InputError, match="does not exist"):
        read_mosaic_frame(tmp_path / "nope.png")
    cv2.imwrite(str(tmp_path / "rgb.png"), np.zeros((H, W, 3), np.uint8))
    with pytest.raises(InputError, match="3 colour channels"):
        read_mosaic_frame(tmp_path / "rgb.png")
    (tmp_path / "junk.png").write_bytes(b"not an image")
    with pytest.raises(InputError, match="junk.png cannot be decoded: it does not start with the PNG signature"):
        read_mosaic_frame(tmp_path / "junk.png")
    a = write_mosaic_png(tmp_path / "a.png", _raw())
    b = write_mosaic_png(tmp_path / "b.png", _raw()[:, :32])
    with pytest.raises(InputError, match="give frames of one sensor"):
        read_mosaic_stack([a, b])


def test_odd_sized_frame_file(tmp_path):
    p = write_mosaic_png(tmp_path / "odd.png", _raw()[:, :63])
    with pytest.raises(InputError, match="63x48 pixels, not a multiple of the 2x2"):
        stokes_from_files([p], mosaic=LAY)


def test_max_pixels(tmp_path):
    p = write_mosaic_png(tmp_path / "m.png", _raw())
    with pytest.raises(InputError, match="above --max-pixels 1000"):
        stokes_from_files([p], mosaic=LAY, max_pixels=1000)
