"""``polarsky calibrate response``: a camera's tone curve from an exposure series, then ``--response``.

The camera is simulated: an invented S-curve on top of sRGB, 8-bit JPEGs from OpenCV's
encoder, EXIF exposure times written by Pillow.  The recovery itself is Debevec & Malik
(1997, SIGGRAPH 97, eq. 3) or Robertson, Borman & Stevenson (2003, J. Electron. Imaging
12(2), eqs. 9-10) as implemented by OpenCV (``cv2.createCalibrateDebevec``,
``cv2.createCalibrateRobertson``): the recovered curve must match the inverse of the curve
that encoded the frames.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from polarsky.cli.main import main
from polarsky.errors import PolarskyWarning
from polarsky.read.response_file import find_response
from polarsky.tasks.stokes import stokes_from_files
from tests.camera_files import write_jpeg
from tests.estimate.test_consistency import _s_curve
from tests.synth import render_frames, smooth_scene

TIMES = [1 / 16, 1 / 8, 1 / 4, 1 / 2, 1, 2, 4]


def _series(folder):
    """The same still scene at 7 exposure times (2 decades of radiance), as the camera writes it."""
    folder.mkdir()
    h, w = 80, 120
    yy, xx = np.mgrid[0:h, 0:w]
    radiance = np.exp(np.log(0.005) + np.log(200) * xx / w) * (0.6 + 0.4 * np.sin(yy / 6.0) ** 2)
    paths = []
    for k, t in enumerate(TIMES):
        enc = np.round(_s_curve(radiance * t * 0.5) * 255).astype(np.uint8)[None]
        paths.append(str(write_jpeg(folder / f"ev_{k}.jpg", enc, quality=95, exposure_s=t, iso=100, f_number=8)))
    return paths


def _true_inverse():
    xs = np.linspace(0, 1, 200001)
    return np.interp(np.arange(256), _s_curve(xs) * 255, xs)


@pytest.mark.parametrize("method", ["debevec", "robertson"])
def test_recovered_curve_matches_the_camera_curve(tmp_path, capsys, method):
    paths = _series(tmp_path / "series")
    out = tmp_path / "resp"
    rc = main(["calibrate", "response", *paths, "--out", str(out), "--response-method", method, "--json"])
    assert rc == 0
    res = json.loads(capsys.readouterr().out)
    assert res["exposure_source"] == "exif" and res["outputs"] == ["response.json"]
    curve = find_response(out).lut[0]
    true = _true_inverse()
    codes = np.arange(40, 230)
    rel = curve[codes] / curve[128] / (true[codes] / true[128])
    assert np.max(np.abs(rel - 1)) < (0.03 if method == "debevec" else 0.06)


def test_response_removes_the_dolp_bias_of_camera_jpegs(tmp_path, capsys):
    assert main(["calibrate", "response", *_series(tmp_path / "series"), "--out", str(tmp_path / "resp")]) == 0
    capsys.readouterr()
    angles = np.arange(0, 180, 30)
    s = smooth_scene(64, 96)
    dolp = np.hypot(s[1, 0], s[2, 0]) / s[0, 0]
    frames = render_frames(s, angles) * 0.8
    paths = [write_jpeg(tmp_path / f"b_{a:03d}deg.jpg", np.round(_s_curve(f) * 255).astype(np.uint8), quality=97)
             for a, f in zip(angles, frames)]
    with pytest.warns(PolarskyWarning):
        plain = stokes_from_files(paths)
    ds = stokes_from_files(paths, response=str(tmp_path / "resp"))  # no warning: the curve is right
    bias_plain = np.nanmedian(plain["dolp"].values[0] - dolp)
    bias_resp = np.nanmedian(ds["dolp"].values[0] - dolp)
    assert abs(bias_plain) > 0.02
    assert abs(bias_resp) < 0.01
    assert ds.attrs["transfer"] == json.dumps(["response"] * 6)


def test_response_series_needs_exposures(tmp_path):
    import subprocess
    import sys

    folder = tmp_path / "s"
    folder.mkdir()
    paths = [str(write_jpeg(folder / f"n{k}.jpg", np.full((1, 8, 8), 50 * k + 20, np.uint8))) for k in range(3)]
    r = subprocess.run([sys.executable, "-m", "polarsky", "calibrate", "response", *paths, "--out",
                        str(tmp_path / "r")], capture_output=True, text=True)
    assert r.returncode == 2
    assert r.stderr.strip().startswith("error: frame n0.jpg has no EXIF exposure time; give --exposures")
    assert len(r.stderr.strip().splitlines()) == 1
