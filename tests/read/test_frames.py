"""Decoding one frame: raw files through LibRaw on their own black and white levels."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.errors import InputError
from polarsky.read.frames import read_frame
from tests.synth import write_bayer_dng


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


def test_pixel_limit_is_checked_per_call_without_global_state(tmp_path):
    # the limit is read from the header before decoding; Pillow's own guard is left alone
    import cv2
    from PIL import Image

    before = Image.MAX_IMAGE_PIXELS
    p = tmp_path / "f_000deg.png"
    cv2.imwrite(str(p), np.zeros((20, 30), np.uint16))
    with pytest.raises(InputError, match="600 pixels, more than the limit 100"):
        read_frame(p, max_pixels=100)
    assert read_frame(p).data.shape == (1, 20, 30)
    assert Image.MAX_IMAGE_PIXELS == before
