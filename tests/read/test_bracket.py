"""A bracket: frames made linear, angles from names, options or a manifest, exposure normalization."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.options.settings import ReadSettings, Settings
from polarsky.read.bracket import load_bracket
from polarsky.read.manifest import read_manifest
from tests.synth import render_frames, smooth_scene, write_pngs, write_tiffs


def _srgb_note(expected: bool):
    """8-bit frames read with the default transfer carry the one-line note on the assumed sRGB curve."""
    import contextlib

    from polarsky.errors import PolarskyWarning

    return pytest.warns(PolarskyWarning, match="assumed sRGB curve") if expected else contextlib.nullcontext()


@pytest.mark.parametrize("bits", [8, 16])
@pytest.mark.parametrize("channels", [1, 3])
def test_png_linearization(tmp_path, bits, channels):
    s = smooth_scene(16, 20, channels=channels)
    frames = render_frames(s, [0, 45, 90])
    paths = write_pngs(tmp_path, frames, [0, 45, 90], bits=bits, srgb=(bits == 8))
    with _srgb_note(bits == 8):
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
    b = load_bracket(paths, ReadSettings(transfer="linear"))
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
    with _srgb_note(True):
        bj = load_bracket(jp)
    assert bj.encodings == ["srgb"] * 3 and bj.n_channels == 3


def test_manifest_with_exposure(tmp_path):
    s = smooth_scene(12, 12)
    frames = render_frames(s, [0, 45, 90, 135])
    exposure = np.array([1 / 100, 1 / 50, 1 / 100, 1 / 200])
    scaled = frames * (exposure / exposure[0])[:, None, None, None] * 0.5
    paths = write_pngs(tmp_path, scaled, [0, 45, 90, 135], bits=16, stem="f")
    man = tmp_path / "manifest.csv"
    man.write_text("file,angle_deg,exposure_s\n" + "".join(f"{p.name},{a},{e}\n" for p, a, e in zip(paths, [0, 45, 90, 135], exposure)))
    m = read_manifest(man)
    assert m.files == tuple(paths) and m.angles_deg == (0, 45, 90, 135) and m.exposures_s[1] == pytest.approx(0.02)
    b = load_bracket((), ReadSettings(manifest=man))
    assert b.exposure_source == "manifest"
    np.testing.assert_allclose(b.exposure_scale, [1, 2, 1, 0.5])
    vals, _, _ = b.linear_block(0, 12)
    np.testing.assert_allclose(vals, frames * 0.5, atol=1e-4)


def test_angles_option_and_count_mismatch(tmp_path):
    s = smooth_scene(8, 8)
    paths = write_pngs(tmp_path, render_frames(s, [0, 45, 90]), [0, 45, 90], stem="x")
    b = load_bracket(paths, Settings.from_options({"angles": "10,55,100"}).read)
    np.testing.assert_allclose(b.angles_deg, [10, 55, 100])
    assert b.angle_source == "option"
    with pytest.raises(InputError, match="2 angle"):
        load_bracket(paths, Settings.from_options({"angles": "0,45"}).read)
    # the same ranges as every command: 10:110:45 = 10, 55, 100
    np.testing.assert_allclose(load_bracket(paths, Settings.from_options({"angles": "10:110:45"}).read).angles_deg,
                               [10, 55, 100])


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
    with _srgb_note(True):
        b = load_bracket(paths)
    assert b.exposure_source == "exif"
    np.testing.assert_allclose(b.exposure_scale, [1.0, 2.0, 2.0])
