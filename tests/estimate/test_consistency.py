"""What a bracket says about itself: per-frame exposure (4+ angles) and the tone curve (5+ angles).

The analyzer model is CONVENTIONS.md's ``I = 1/2 (S0 + D (S1 cos 2theta + S2 sin 2theta))``
(Malus's law, Collett 2005).  A gain per frame multiplies it; a tone curve ``f`` applied to
it adds a fourth harmonic whose size, relative to the second, is ``f f'' / f'^2`` [X] (a
second-order Taylor expansion; for ``f(L) = L^gamma`` it is ``1 - 1/gamma``).
"""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.errors import InputError, PolarskyWarning
from polarsky.estimate.consistency import estimate_exposure, evidently_wrong, tone_check
from polarsky.core.stokes import analysis_matrix
from polarsky.tasks.stokes import stokes_from_files
from polarsky.read.stokes_file import decode_attrs
from tests.camera_files import write_jpeg, write_tiff
from tests.synth import render_frames, smooth_scene


def _flat(values):
    return values.reshape(values.shape[0], values.shape[1], -1)


@pytest.mark.parametrize("angles", [[0, 45, 90, 135], [0, 30, 60, 90, 120, 150]])
def test_frame_gains_recovered_from_the_bracket_alone(angles):
    s = smooth_scene(40, 60)
    gains = np.array([1.0, 1.25, 0.8, 1.1, 0.95, 1.05])[: len(angles)]
    frames = render_frames(s, angles, noise=0.002) * gains[:, None, None, None]
    v = _flat(frames)
    w = analysis_matrix(np.asarray(angles, float))[None]
    g, sigma = estimate_exposure(v, np.ones(v.shape[1:], bool), w)
    np.testing.assert_allclose(g, gains, rtol=0.01)
    assert np.all(sigma < 0.01)


def test_frame_gains_not_identifiable_from_3_frames():
    s = smooth_scene(20, 20)
    v = _flat(render_frames(s, [0, 60, 120]))
    g, sigma = estimate_exposure(v, np.ones(v.shape[1:], bool), analysis_matrix(np.array([0.0, 60, 120]))[None])
    assert g is None and sigma is None


def _tiffs(tmp_path, frames, angles, stem="x"):
    return [write_tiff(tmp_path / f"{stem}_{a:03d}deg.tif", np.round(np.clip(f, 0, 1) * 65535).astype(np.uint16))
            for a, f in zip(angles, frames)]


def test_exposure_auto_corrects_a_drifting_exposure_and_is_reported(tmp_path):
    angles = [0, 45, 90, 135]
    s = smooth_scene(40, 60)
    dolp = np.hypot(s[1, 0], s[2, 0]) / s[0, 0]
    gains = np.array([1.0, 1.2, 0.85, 1.1])
    paths = _tiffs(tmp_path, render_frames(s, angles) * 0.7 * gains[:, None, None, None], angles)
    with pytest.warns(PolarskyWarning, match=r"exposed differently from equal exposures \(x_045deg\.tif x1\.200"):
        plain = stokes_from_files(paths)
    assert np.nanmedian(np.abs(plain["dolp"].values[0] - dolp)) > 0.03
    ds = stokes_from_files(paths, exposure="auto")
    attrs = decode_attrs(ds.attrs)
    assert attrs["exposure_source"] == "bracket"
    np.testing.assert_allclose(attrs["exposure_estimate"], gains, rtol=2e-3)
    assert np.nanmax(np.abs(ds["dolp"].values[0] - dolp)) < 2e-3


def test_exposure_auto_needs_4_angles(tmp_path):
    s = smooth_scene(12, 12)
    paths = _tiffs(tmp_path, render_frames(s, [0, 60, 120]), [0, 60, 120])
    with pytest.raises(InputError, match="--exposure auto estimates each frame's exposure from a bracket of 4 or more"):
        stokes_from_files(paths, exposure="auto")


def test_power_law_left_in_the_data_gives_kappa_one_minus_one_over_gamma():
    angles = np.arange(0, 180, 22.5)
    s = smooth_scene(60, 80)
    frames = render_frames(s, angles) * 0.8
    w = analysis_matrix(angles)[None]
    for gamma in (1.0, 1.25, 0.8):
        v = _flat(frames ** gamma)
        chk = tone_check(v, np.ones(v.shape[1:], bool), w)
        ks = [k for k in chk["curvature"] if k is not None]
        assert ks
        # second-order expansion: exact for small DoLP, within 0.03 for this scene's DoLP <= 0.7
        np.testing.assert_allclose(ks, 1 - 1 / gamma, atol=0.03)
        assert bool(evidently_wrong(chk)) == (gamma != 1.0)


def test_tone_check_needs_5_angles():
    s = smooth_scene(20, 20)
    angles = np.array([0.0, 45, 90, 135])
    v = _flat(render_frames(s, angles))
    assert tone_check(v, np.ones(v.shape[1:], bool), analysis_matrix(angles)[None]) is None


def _s_curve(lin):
    """A camera-like tone curve: sRGB plus a contrast S-curve (invented for the test)."""
    from polarsky.core.transfer import linear_to_srgb

    g = linear_to_srgb(np.clip(lin, 0, 1))
    return np.clip(g + 0.06 * np.sin(2 * np.pi * g), 0, 1)


def test_camera_s_curve_jpegs_warned_by_the_tone_check(tmp_path):
    # 8-bit JPEGs (OpenCV encoder) with a camera S-curve, decoded with the assumed sRGB curve:
    # the residual's fourth harmonic shows the curve is wrong.
    angles = np.arange(0, 180, 30)
    s = smooth_scene(64, 96)
    frames = render_frames(s, angles) * 0.8
    paths = [write_jpeg(tmp_path / f"j_{a:03d}deg.jpg", np.round(_s_curve(f) * 255).astype(np.uint8), quality=97)
             for a, f in zip(angles, frames)]
    with pytest.warns(PolarskyWarning) as caught:
        ds = stokes_from_files(paths)
    said = " ".join(str(w.message) for w in caught)
    assert "assumed sRGB curve is evidently wrong" in said
    assert "assumed sRGB curve; a camera's own tone curve" in said
    assert decode_attrs(ds.attrs)["response_check"]["curvature"]


def test_one_kind_of_polarization_pins_down_no_gains(tmp_path):
    # Every pixel with the same DoLP and AoLP: a gain per frame is indistinguishable from a
    # different polarization state, so there is no estimate and --exposure auto is refused.
    rng = np.random.default_rng(2)
    base = 0.2 + 0.6 * rng.random((30, 40))
    s = np.stack([base, 0.3 * base, -0.1 * base])[:, None]
    angles = [0, 45, 90, 135]
    frames = render_frames(s, angles, noise=0.001) * np.array([1, 0.8, 1.1, 1.0])[:, None, None, None]
    v = _flat(frames)
    g, sigma = estimate_exposure(v, np.ones(v.shape[1:], bool), analysis_matrix(np.asarray(angles, float))[None])
    assert g is None and sigma is None
    paths = _tiffs(tmp_path, frames, angles, stem="u")
    with pytest.raises(InputError, match="--exposure auto: the bracket does not pin down each frame's exposure"):
        stokes_from_files(paths, exposure="auto")
