"""Exposure metadata where cameras, TIFF/EP writers and raw files put it (EXIF written by Pillow,
JPEG pixels by OpenCV, DNG tags by tifffile).

Relative exposure ``t * ISO/100 / N^2`` is exposure-value arithmetic (common practice; ISO
2720:1974 defines EV = log2(N^2/t) at a given sensitivity).
"""

from __future__ import annotations

import numpy as np
import pytest

from polarsky.errors import PolarskyWarning
from polarsky.read.bracket import load_bracket
from polarsky.read.exif import read_metadata
from tests.camera_files import write_dng, write_jpeg, write_tiff


@pytest.mark.parametrize("where", ["exif", "ifd0"])
def test_exposure_tags_read_from_exif_sub_ifd_and_from_ifd0(tmp_path, where):
    p = write_jpeg(tmp_path / "a.jpg", np.full((1, 8, 8), 120, np.uint8), exposure_s=1 / 250, iso=400, f_number=5.6,
                   where=where)
    meta = read_metadata(p)
    assert meta["exposure_s"] == pytest.approx(1 / 250)
    assert meta["iso"] == 400 and meta["f_number"] == pytest.approx(5.6)


def test_raw_dng_exposure_time_in_ifd0(tmp_path):
    # a DNG (TIFF/EP) carries ExposureTime in IFD0
    p = write_dng(tmp_path / "r.dng", np.full((16, 16), 9000, np.uint16), exposure_s=1 / 30)
    assert read_metadata(p)["exposure_s"] == pytest.approx(1 / 30)


def test_exposure_changed_within_a_tiff_ep_bracket_is_normalized(tmp_path):
    # Frames whose exposure is in IFD0 only: the bracket is normalized, not processed raw.
    frames = np.full((4, 1, 8, 8), 0.3)
    times = [1 / 100, 1 / 50, 1 / 100, 1 / 200]
    paths = []
    for k, (f, t) in enumerate(zip(frames, times)):
        v = np.round(f * (t / times[0]) * 65535).astype(np.uint16)
        from fractions import Fraction

        fr = Fraction(t).limit_denominator(10000)
        paths.append(write_tiff(tmp_path / f"t_{45 * k:03d}deg.tif", v,
                                extratags=[(33434, "2I", 1, (fr.numerator, fr.denominator))]))
    b = load_bracket(paths)
    assert b.exposure_source == "exif"
    np.testing.assert_allclose(b.exposure_scale, [1, 2, 1, 0.5])
    np.testing.assert_allclose(b.linear_block(0, 8)[0], 0.3, atol=1e-4)


def test_exposure_missing_in_some_frames_names_them(tmp_path):
    paths = [write_jpeg(tmp_path / f"m_{a:03d}deg.jpg", np.full((1, 8, 8), 120, np.uint8),
                        **({"exposure_s": 1 / 100} if a != 90 else {"orientation": 1})) for a in (0, 45, 90)]
    with pytest.warns(PolarskyWarning) as caught:
        load_bracket(paths)
    assert any("EXIF exposure is missing in m_090deg.jpg" in str(w.message) for w in caught)
