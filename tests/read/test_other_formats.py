"""TIFFs as scanners, raw converters and scientific cameras write them (tifffile), and NaN pixels.

The radiometric rule checked is CONVENTIONS.md's: values are scaled to [0, 1] of the
*format's* full scale (2^bits - 1 for integers, TIFF 6.0 BitsPerSample), never of each
frame's own maximum, which would give every frame its own gain and bias the Stokes fit.
"""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.errors import InputError, PolarskyWarning
from polarsky.read.bracket import load_bracket
from polarsky.options.settings import Settings
from polarsky.tasks.stokes import stokes_from_files
from tests.camera_files import write_tiff
from tests.synth import render_frames, smooth_scene

ANGLES = [0, 45, 90, 135]


def _truth():
    s = smooth_scene(16, 24)
    dolp = np.hypot(s[1, 0], s[2, 0]) / s[0, 0]
    aolp = np.degrees(0.5 * np.arctan2(s[2, 0], s[1, 0])) % 180
    return s, dolp, aolp


def _names(tmp_path, stem):
    return [tmp_path / f"{stem}_{a:03d}deg.tif" for a in ANGLES]


def _check(ds, dolp, aolp, tol_dolp=1e-3, tol_aolp=0.1):
    got = ds["dolp"].values[0]
    assert np.nanmax(np.abs(got - dolp)) < tol_dolp
    err = np.abs((ds["aolp"].values[0] - aolp + 90) % 180 - 90)
    assert np.nanmax(err) < tol_aolp


def test_32_bit_integer_tiff_scaled_by_the_format_not_each_frames_maximum(tmp_path):
    # A 32-bit integer TIFF scaled by each frame's own maximum gave each frame its own gain.
    s, dolp, aolp = _truth()
    frames = render_frames(s, ANGLES) * 0.6                      # no frame reaches full scale
    paths = [write_tiff(p, np.round(f * (2 ** 32 - 1)).astype(np.uint32)) for p, f in zip(_names(tmp_path, "d"), frames)]
    ds = stokes_from_files(paths)
    _check(ds, dolp, aolp)
    assert ds.attrs["bit_depth"] == 32


def test_24_bit_data_in_32_bit_tiff_with_bit_depth(tmp_path):
    s, dolp, aolp = _truth()
    frames = render_frames(s, ANGLES) * 0.6
    paths = [write_tiff(p, np.round(f * (2 ** 24 - 1)).astype(np.uint32)) for p, f in zip(_names(tmp_path, "e"), frames)]
    ds = stokes_from_files(paths, bit_depth=24)
    _check(ds, dolp, aolp)
    b = load_bracket(paths, Settings.from_options({"bit_depth": 24}).read)
    np.testing.assert_allclose(b.linear_block(0, 16)[0], frames, atol=1e-6)
    with pytest.raises(InputError, match=r"above 4095 = 2\^12-1 of --bit-depth 12"):
        load_bracket(paths, Settings.from_options({"bit_depth": 12}).read)


def test_cmyk_tiff_is_refused_naming_the_file(tmp_path):
    p = write_tiff(tmp_path / "scan_000deg.tif", np.zeros((4, 8, 8), np.uint8), photometric="separated")
    from polarsky.read.frames import read_frame

    with pytest.raises(InputError, match=r"scan_000deg\.tif is a CMYK TIFF .*export it as RGB"):
        read_frame(p)


def test_multi_page_tiff_reads_the_first_page_and_says_so(tmp_path):
    # tifffile.imread stacks equal pages, which looked like R, G, B channels.
    import tifffile

    p = tmp_path / "stack_000deg.tif"
    pages = np.stack([np.full((8, 10), v, np.uint16) for v in (1000, 40000, 60000)])
    tifffile.imwrite(p, pages[0])
    tifffile.imwrite(p, pages[1], append=True)
    tifffile.imwrite(p, pages[2], append=True)
    from polarsky.read.frames import read_frame

    with pytest.warns(PolarskyWarning, match=r"stack_000deg\.tif holds 3 pages; only the first was read"):
        fr = read_frame(p)
    assert fr.data.shape == (1, 8, 10) and int(fr.data.max()) == 1000


def test_float_tiff_in_0_65535_scale_says_what_was_assumed(tmp_path):
    # Was: every pixel called saturated, with the advice to shorten the exposure.
    s, dolp, aolp = _truth()
    frames = render_frames(s, ANGLES)
    paths = [write_tiff(p, (f * 65535).astype(np.float32)) for p, f in zip(_names(tmp_path, "f"), frames)]
    with pytest.raises(InputError, match=r"floating-point image with values up to .* above the assumed full scale 1 "
                                         r"\(0\.\.1\); give its full scale with --float-scale"):
        stokes_from_files(paths)
    ds = stokes_from_files(paths, float_scale=65535)
    _check(ds, dolp, aolp)
    assert ds.attrs["float_scale"] == 65535


def test_nan_and_inf_pixels_are_not_valid_rather_than_black(tmp_path):
    s, dolp, aolp = _truth()
    frames = render_frames(s, ANGLES).astype(np.float32)
    frames[1, 0, 3, 4] = np.nan
    frames[2, 0, 5, 6] = np.inf
    paths = [write_tiff(p, f) for p, f in zip(_names(tmp_path, "n"), frames)]
    with pytest.warns(PolarskyWarning, match=r"NaN or infinite") as caught:
        ds = stokes_from_files(paths)
    said = " ".join(str(w.message) for w in caught)
    assert "1 pixel values of n_045deg.tif are NaN or infinite" in said and "n_090deg.tif" in said
    valid = ds["valid"].values[0]
    assert not valid[3, 4] and not valid[5, 6]
    assert valid.sum() == valid.size - 2
    assert ds.attrs["black_px"] in ("[0, 0, 0, 0]", [0, 0, 0, 0])  # not counted as black
    good = valid.copy()
    assert np.nanmax(np.abs(ds["dolp"].values[0][good] - dolp[good])) < 1e-4


def test_bit_depth_option_now_applies_to_brackets_too(tmp_path):
    # 12-bit data in 16-bit PNG containers: full scale 4095 with --bit-depth 12.
    import cv2

    s, dolp, aolp = _truth()
    frames = render_frames(s, ANGLES) * 0.9
    paths = []
    for a, f in zip(ANGLES, frames):
        p = tmp_path / f"c_{a:03d}deg.png"
        cv2.imwrite(str(p), np.round(f[0] * 4095).astype(np.uint16))
        paths.append(p)
    b = load_bracket(paths, Settings.from_options({"bit_depth": 12}).read)
    np.testing.assert_allclose(b.linear_block(0, 16)[0], frames, atol=2e-4)
