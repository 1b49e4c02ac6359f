"""Hand-held roll: rotation and scale registered, analyzer angles corrected for a filter on the lens.

The bracket is rendered here with known truth: each frame is the scene seen by a camera rolled
by a fraction of a degree (content turned by ``rho`` counter-clockwise as displayed, OpenCV's
``getRotationMatrix2D`` convention, a general-purpose reference), with the filter on the lens
at ``theta_k`` on the camera's own image.  On the first frame's image the analyzer then lies at
``theta_k - rho_k`` (CONVENTIONS.md: angles counter-clockwise as displayed).
"""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.read.stokes_file import decode_attrs
from polarsky.tasks.stokes import stokes_from_files
from tests.camera_files import write_tiff

ANGLES = np.array([0.0, 45.0, 90.0, 135.0])
ROLL = np.array([0.0, 0.6, -0.5, 0.8])
SCALE = np.array([1.0, 1.002, 0.998, 1.001])


def _scene(h=200, w=240, seed=3):
    """Textured S0 with smoothly varying polarization (invented), on the first frame's image."""
    import cv2

    rng = np.random.default_rng(seed)
    tex = cv2.GaussianBlur(rng.random((h, w)).astype(np.float32), (0, 0), 2.0)
    tex = (tex - tex.min()) / (tex.max() - tex.min())
    yy, xx = np.mgrid[0:h, 0:w]
    s0 = 0.25 + 0.5 * tex
    dolp = 0.3 + 0.3 * xx / w
    aolp = np.radians(30 + 60 * yy / h)
    return s0, dolp, aolp


def _bracket(tmp_path, roll, scale, *, filter_on_lens=True):
    import cv2

    s0, dolp, aolp = _scene()
    h, w = s0.shape
    paths = []
    for k, (theta, rho, sc) in enumerate(zip(ANGLES, roll, scale)):
        eff = np.radians(theta - rho) if filter_on_lens else np.radians(theta)
        img = 0.5 * s0 * (1 + dolp * np.cos(2 * (eff - aolp)))
        m = cv2.getRotationMatrix2D(((w - 1) / 2, (h - 1) / 2), float(rho), float(sc))
        turned = cv2.warpAffine(img.astype(np.float32), m, (w, h), flags=cv2.INTER_CUBIC, borderMode=cv2.BORDER_REFLECT)
        paths.append(write_tiff(tmp_path / f"h_{int(theta):03d}deg.tif",
                                np.round(np.clip(turned, 0, 1) * 65535).astype(np.uint16)[None]))
    return paths, np.degrees(aolp) % 180


def _aolp_err(ds, truth, margin=20):
    got = ds["aolp"].values[0][margin:-margin, margin:-margin]
    tr = truth[margin:-margin, margin:-margin]
    return np.abs((got - tr + 90) % 180 - 90)


def test_hand_held_roll_measured_and_analyzer_angles_corrected(tmp_path):
    paths, truth = _bracket(tmp_path, ROLL, SCALE)
    ds = stokes_from_files(paths, align=True)
    attrs = decode_attrs(ds.attrs)
    np.testing.assert_allclose(attrs["rotations_deg"], ROLL, atol=0.03)
    np.testing.assert_allclose(attrs["scales"], SCALE, atol=5e-4)
    np.testing.assert_allclose(attrs["roll_corrections_deg"], -ROLL, atol=0.03)
    assert attrs["filter_mount"] == "lens"
    assert np.nanmedian(_aolp_err(ds, truth)) < 0.1


def test_without_the_roll_correction_aolp_is_off_by_the_roll(tmp_path):
    # the same bracket read as if the filter were fixed to the scene: the roll shows as AoLP error
    paths, truth = _bracket(tmp_path, ROLL, SCALE)
    ds = stokes_from_files(paths, align=True, filter_mount="scene")
    assert decode_attrs(ds.attrs).get("roll_corrections_deg") is None
    assert np.nanmedian(_aolp_err(ds, truth)) > 0.15


def test_filter_fixed_to_the_scene_needs_no_correction(tmp_path):
    paths, truth = _bracket(tmp_path, ROLL, SCALE, filter_on_lens=False)
    ds = stokes_from_files(paths, align=True, filter_mount="scene")
    assert np.nanmedian(_aolp_err(ds, truth)) < 0.1


def test_filter_mount_without_align_is_refused(tmp_path):
    paths, _ = _bracket(tmp_path, np.zeros(4), np.ones(4))
    with pytest.raises(InputError, match="--filter-mount says how the analyzer angles follow a roll that --align"):
        stokes_from_files(paths, filter_mount="scene")
