"""Reading frames: formats, radiometry, angles, manifests, exposure, raw files."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.errors import InputError, PolarskyWarning
from polarsky.ingest import angle_from_name, load_bracket, read_frame, read_manifest
from polarsky.transfer import srgb_to_linear
from tests.synth import render_frames, smooth_scene, write_bayer_dng, write_pngs, write_tiffs


def test_angle_tokens():
    assert angle_from_name("pier_045deg.tif") == 45.0
    assert angle_from_name("a_22.5deg.png") == 22.5
    assert angle_from_name("no_angle.png") is None
    assert angle_from_name("two_0deg_90deg.png") is None


@pytest.mark.parametrize("bits", [8, 16])
@pytest.mark.parametrize("channels", [1, 3])
def test_png_linearization(tmp_path, bits, channels):
    s = smooth_scene(16, 20, channels=channels)
    frames = render_frames(s, [0, 45, 90])
    paths = write_pngs(tmp_path, frames, [0, 45, 90], bits=bits, srgb=(bits == 8))
    b = load_bracket(paths)
    assert b.n_channels == channels
    assert b.angle_source == "file names"
    vals, invalid, _ = b.linear_block(0, 16)
    tol = 4.5e-3 if bits == 8 else 2e-5  # half an 8-bit sRGB code step at the bright end
    np.testing.assert_allclose(vals, frames, atol=tol)
    assert b.encodings == ["srgb" if bits == 8 else "linear"] * 3


def test_transfer_override(tmp_path):
    s = smooth_scene(8, 8)
    frames = render_frames(s, [0, 60, 120])
    paths = write_pngs(tmp_path, frames, [0, 60, 120], bits=8)
    b = load_bracket(paths, transfer="linear")
    vals, _, _ = b.linear_block(0, 8)
    np.testing.assert_allclose(vals, frames, atol=2.5e-3)


def test_tiff_rgb_and_jpeg(tmp_path):
    import cv2

    s = smooth_scene(16, 24, channels=3)
    frames = render_frames(s, [0, 60, 120])
    paths = write_tiffs(tmp_path / "t", frames, [0, 60, 120])
    b = load_bracket(paths)
    assert b.channels == ["R", "G", "B"]
    np.testing.assert_allclose(b.linear_block(0, 16)[0], frames, atol=2e-5)
    jp = []
    for k, a in enumerate([0, 60, 120]):
        p = tmp_path / f"j_{a:03d}deg.jpg"
        enc = np.round(np.clip(frames[k], 0, 1) ** (1 / 2.2) * 255).astype(np.uint8)
        cv2.imwrite(str(p), np.moveaxis(enc, 0, -1)[..., ::-1], [cv2.IMWRITE_JPEG_QUALITY, 98])
        jp.append(p)
    bj = load_bracket(jp)
    assert bj.encodings == ["srgb"] * 3 and bj.n_channels == 3


def test_raw_dng_path_matches_values_written(tmp_path):
    # The DNG's own BlackLevel/WhiteLevel define the linear scale: (v - black)/(white - black).
    # A flat CFA with one value per colour must decode (LibRaw, gamma 1, no auto-brightening,
    # adjust_maximum_thr=0) to exactly those normalized values.
    black, white = 512, 16383
    cfa = np.zeros((24, 32), np.uint16)
    vals = {"R": 4000, "G": 8000, "B": 12000}
    cfa[0::2, 0::2] = vals["R"]
    cfa[0::2, 1::2] = vals["G"]
    cfa[1::2, 0::2] = vals["G"]
    cfa[1::2, 1::2] = vals["B"]
    p = write_bayer_dng(tmp_path / "flat.dng", cfa, black=black, white=white)
    fr = read_frame(p)
    assert fr.kind == "raw" and fr.encoding == "linear" and fr.data.shape == (3, 24, 32)
    got = fr.data[:, 4:-4, 4:-4].astype(np.float64) / 65535
    for c, key in enumerate("RGB"):
        assert np.median(got[c]) == pytest.approx((vals[key] - black) / (white - black), abs=2e-4)


def test_raw_bright_frame_is_not_rescaled(tmp_path):
    # With LibRaw's maximum adjustment on, a frame whose brightest value is below WhiteLevel gets
    # stretched; with adjust_maximum_thr=0 a value of 70% stays 70%.
    black, white = 0, 16383
    cfa = np.full((24, 24), int(0.7 * white), np.uint16)
    fr = read_frame(write_bayer_dng(tmp_path / "b.dng", cfa, black=black, white=white))
    assert np.median(fr.data) / 65535 == pytest.approx(0.7, abs=1e-3)


def test_manifest_with_exposure(tmp_path):
    s = smooth_scene(12, 12)
    frames = render_frames(s, [0, 45, 90, 135])
    exposure = np.array([1 / 100, 1 / 50, 1 / 100, 1 / 200])
    scaled = frames * (exposure / exposure[0])[:, None, None, None] * 0.5
    paths = write_pngs(tmp_path, scaled, [0, 45, 90, 135], bits=16, stem="f")
    man = tmp_path / "manifest.csv"
    man.write_text("file,angle_deg,exposure_s\n" + "".join(f"{p.name},{a},{e}\n" for p, a, e in zip(paths, [0, 45, 90, 135], exposure)))
    files, angles, exps = read_manifest(man)
    assert angles == [0, 45, 90, 135] and exps[1] == pytest.approx(0.02)
    b = load_bracket(manifest=man)
    assert b.exposure_source == "manifest"
    np.testing.assert_allclose(b.exposure_scale, [1, 2, 1, 0.5])
    vals, _, _ = b.linear_block(0, 12)
    np.testing.assert_allclose(vals, frames * 0.5, atol=1e-4)


def test_saturated_pixels_are_masked_and_counted(tmp_path):
    from polarsky.pipeline import stokes_from_files

    s = smooth_scene(10, 10)
    frames = render_frames(s, [0, 45, 90, 135])
    frames[1, 0, 2:4, 2:5] = 1.0
    paths = write_pngs(tmp_path, frames, [0, 45, 90, 135])
    with pytest.warns(PolarskyWarning, match=r"6 pixel values saturated .* scene_045deg.png were masked"):
        ds = stokes_from_files(paths)
    assert not ds["valid"].values[0, 2:4, 2:5].any()
    assert np.isnan(ds["dolp"].values[0, 2, 2])
    assert ds["valid"].values.sum() == 100 - 6


def test_angles_option_and_count_mismatch(tmp_path):
    s = smooth_scene(8, 8)
    paths = write_pngs(tmp_path, render_frames(s, [0, 45, 90]), [0, 45, 90], stem="x")
    b = load_bracket(paths, angles_deg="10,55,100")
    np.testing.assert_allclose(b.angles_deg, [10, 55, 100])
    with pytest.raises(InputError, match="2 angle"):
        load_bracket(paths, angles_deg="0,45")


def test_exposure_normalization_from_exif(tmp_path):
    # JPEG frames whose EXIF ExposureTime/ISO/FNumber differ: values are divided by the relative
    # exposure t * ISO / N^2 (common practice: exposure value arithmetic).
    from fractions import Fraction

    from PIL import Image, TiffImagePlugin

    exposures = [(Fraction(1, 100), 100, 4.0), (Fraction(1, 50), 100, 4.0), (Fraction(1, 100), 200, 4.0)]
    paths = []
    for k, (t, iso, fn) in enumerate(exposures):
        im = Image.fromarray(np.full((8, 8, 3), 100, np.uint8))
        exif = im.getexif()
        ifd = exif.get_ifd(0x8769)
        ifd[0x829A] = TiffImagePlugin.IFDRational(t.numerator, t.denominator)
        ifd[0x8827] = iso
        ifd[0x829D] = TiffImagePlugin.IFDRational(int(fn * 10), 10)
        p = tmp_path / f"e_{k * 60:03d}deg.jpg"
        im.save(p, exif=exif.tobytes(), quality=95)
        paths.append(p)
    b = load_bracket(paths)
    assert b.exposure_source == "exif"
    np.testing.assert_allclose(b.exposure_scale, [1.0, 2.0, 2.0])
