"""``polarsky stokes --mosaic ...`` on the command line (in-process and as a subprocess)."""

import json
import subprocess
import sys

import numpy as np
import pytest

from polarsky.cli.main import main
from polarsky.read.stokes_file import open_stokes
from polarsky.synthetic.mosaic import mosaic_sample, scene_uniform, write_mosaic_png
from polarsky.write.summary import SUMMARY_KEYS
H, W = 48, 64
LAY = "90,45;135,0"


@pytest.fixture
def frame(tmp_path):
    raw = mosaic_sample(scene_uniform(H, W, s0=0.7, dolp=0.35, aolp_deg=120.0), LAY, dtype=np.float64)
    return str(write_mosaic_png(tmp_path / "cam.png", raw, full=4095))


def test_stokes_mosaic_in_process_json(tmp_path, frame, capsys):
    out = tmp_path / "out"
    rc = main(["stokes", frame, "--mosaic", LAY, "--demosaic", "newton", "--bit-depth", "12", "--out", str(out), "--json"])
    assert rc == 0
    stdout = capsys.readouterr().out
    summary = json.loads(stdout)  # exactly one JSON object
    assert stdout.count("\n") == 1
    assert summary["mosaic"] == LAY and summary["demosaic"] == "newton" and summary["polarizer"] == "sensor"
    assert summary["bit_depth"] == 12 and summary["channels"] == ["L"]
    assert abs(summary["mean_dolp"]["L"] - 0.35) < 1e-3
    for name in ("stokes.nc", "summary.json", "dolp.png", "aolp.png", "polarization.png"):
        assert (out / name).is_file()
    ds = open_stokes(out / "stokes.nc")
    assert ds.attrs["mosaic"] == LAY and ds.attrs["demosaic"] == "newton"
    np.testing.assert_allclose(ds.aolp.values, 120.0, atol=0.05)


def test_stokes_mosaic_subprocess_text(tmp_path, frame):
    r = subprocess.run([sys.executable, "-m", "polarsky", "stokes", frame, "--mosaic", LAY, "--demosaic", "superpixel",
                        "--out", str(tmp_path / "o")], cwd=tmp_path, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "1 mosaic frame(s), analyzers at 90, 45, 135, 0 deg (mosaic cell), 32x24 px" in r.stdout


@pytest.mark.parametrize("args, match", [
    (["--mosaic", "90,45;135,45"], "error: mosaic '90,45;135,45' does not hold four distinct orientations"),
    (["--mosaic", "90,45,135,0"], "error: mosaic '90,45,135,0' is not a 2x2 cell"),
    (["--mosaic-color", "RGGB"], "error: --mosaic-color apply only to mosaic frames; add --mosaic"),
    (["--mosaic", LAY, "--angles", "0,45,90,135"], "error: --angles describes a bracket of frames"),
    (["--mosaic", LAY, "--mosaic-color", "RGGB", "--bit-depth", "12", "--black-level", "99999"],
     "error: black level 99999 is outside"),
    (["--mosaic", LAY, "--demosaic", "cubic"], "error: Invalid value for '--demosaic'"),
])
def test_bad_input_exit_2(tmp_path, frame, capsys, args, match):
    out = tmp_path / "o"
    rc = main(["stokes", frame, *args, "--out", str(out)])
    err = capsys.readouterr().err
    assert rc == 2
    assert err.startswith(match) and err.count("\n") == 1
    assert not (out / "stokes.nc").exists()


def test_frame_not_multiple_of_cell_cli(tmp_path, capsys):
    p = write_mosaic_png(tmp_path / "odd.png", np.full((H, W - 2), 0.3))
    rc = main(["stokes", str(p), "--mosaic", LAY, "--mosaic-color", "GBRG", "--out", str(tmp_path / "o")])
    assert rc == 2
    assert "62x48 pixels, not a multiple of the 4x4 colour mosaic" in capsys.readouterr().err


def test_mosaic_and_bracket_summaries_share_one_schema(tmp_path, frame, png_bracket, capsys):
    # the same keys in the same order, and the same type for every key both paths fill
    assert main(["stokes", frame, "--mosaic", LAY, "--bit-depth", "12", "--out", str(tmp_path / "m"), "--json"]) == 0
    mosaic = json.loads(capsys.readouterr().out)
    paths, _ = png_bracket
    assert main(["stokes", *map(str, paths), "--out", str(tmp_path / "b"), "--json"]) == 0
    bracket = json.loads(capsys.readouterr().out)
    assert list(mosaic) == list(bracket) == list(SUMMARY_KEYS)
    for key in SUMMARY_KEYS:
        if mosaic[key] is not None and bracket[key] is not None:
            assert type(mosaic[key]) is type(bracket[key]), key
    assert mosaic["transfer"] == ["linear"] and mosaic["mosaic_color"] is None and mosaic["calibration"] is None
    assert bracket["mosaic"] is None and mosaic["output_pixel_size_px"] == 1
