"""The options of camera files on the command line: one-line errors, and a summary whose new keys
(orientation, roll, scale, exposure estimate, response check) validate against the documented
schema (JSON Schema 2020-12, checked with the general-purpose ``jsonschema`` library)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from polarsky.cli.main import main
from tests.camera_files import write_tiff
from tests.synth import render_frames, smooth_scene

SCHEMA = Path(__file__).resolve().parents[2] / "docs" / "schemas" / "summary.schema.json"


def _bracket(tmp_path, angles):
    s = smooth_scene(48, 64)
    frames = render_frames(s, angles) * 0.8
    return [str(write_tiff(tmp_path / f"c_{int(a):03d}deg.tif", np.round(f * 65535).astype(np.uint16), orientation=6))
            for a, f in zip(angles, frames)]


def test_summary_with_every_camera_fact_validates(tmp_path):
    import jsonschema

    paths = _bracket(tmp_path, np.arange(0, 180, 30))
    r = subprocess.run([sys.executable, "-m", "polarsky", "stokes", *paths, "--align", "--exposure", "auto", "--out",
                        str(tmp_path / "o"), "--json", "--no-pictures"], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    summary = json.loads(r.stdout)
    assert r.stderr.strip().startswith("warning: frames are shown turned 90 deg clockwise (orientation 6)")
    jsonschema.validate(summary, json.loads(SCHEMA.read_text()))
    assert summary["orientation"] == 6 and summary["frame_orientations"] == [6] * 6
    assert summary["angle_frame"] == "camera" and summary["exposure_source"] == "bracket"
    assert summary["response_check"]["curvature"] and len(summary["rotations_deg"]) == 6
    assert summary["filter_mount"] == "lens" and summary["bit_depth"] == 16
    assert any("orientation 6" in w for w in summary["warnings"])


#: option and value -> the start of the one-line error
BAD_OPTIONS = {
    "--bit-depth=40": "error: --bit-depth 40 must be a whole number of bits from 8 to 32",
    "--float-scale=-1": "error: --float-scale must be positive",
    "--orientation=portrait": "error: --orientation 'portrait' must be auto or an orientation 1..8",
    "--response=nowhere": "error: response curve nowhere does not exist; give the response.json",
    "--exposure=sometimes": "error: Invalid value for '--exposure'",
}


@pytest.mark.parametrize("option", sorted(BAD_OPTIONS))
def test_bad_camera_options_give_one_line(tmp_path, option):
    message = BAD_OPTIONS[option]
    paths = _bracket(tmp_path, [0, 45, 90, 135])
    r = subprocess.run([sys.executable, "-m", "polarsky", "stokes", *paths, option, "--out", str(tmp_path / "o")],
                       capture_output=True, text=True, cwd=tmp_path)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert any(line.startswith(message) for line in lines), r.stderr
    assert "Traceback" not in r.stderr


def test_response_and_transfer_together_refused(tmp_path, capsys):
    (tmp_path / "r").mkdir()
    (tmp_path / "r" / "response.json").write_text(json.dumps({"polarsky_response": "1", "method": "debevec",
                                                              "curve": [list(np.linspace(0, 1, 256))]}))
    paths = _bracket(tmp_path, [0, 45, 90, 135])
    rc = main(["stokes", *paths, "--response", str(tmp_path / "r"), "--transfer", "srgb", "--out", str(tmp_path / "o")])
    assert rc == 2
    assert "error: --response and --transfer srgb both say how to linearize the frames; give one" in capsys.readouterr().err
