"""``polarsky stokes --mosaic ...`` on the command line (in-process and as a subprocess)."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from cli.main import main
from polarsky.dataset import open_stokes
from polarsky.mosaic.synthetic import mosaic_sample, scene_uniform, write_mosaic_png

ROOT = Path(__file__).resolve().parents[1]
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
    r = subprocess.run([sys.executable, "-m", "cli.main", "stokes", frame, "--mosaic", LAY, "--demosaic", "superpixel",
                        "--out", str(tmp_path / "o")], cwd=ROOT, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "mosaic layout" in r.stdout and "32x24" in r.stdout


@pytest.mark.parametrize("args, match", [
    (["--mosaic", "90,45;135,45"], "error: mosaic '90,45;135,45' does not hold four distinct orientations"),
    (["--mosaic", "90,45,135,0"], "error: mosaic '90,45,135,0' is not a 2x2 cell"),
    (["--mosaic-colour", "RGGB"], "error: --mosaic-colour apply only to mosaic frames; add --mosaic"),
    (["--mosaic", LAY, "--angles", "0,45,90,135"], "error: --angles describes a bracket of frames"),
    (["--mosaic", LAY, "--mosaic-colour", "RGGB", "--bit-depth", "12", "--black-level", "99999"],
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
    rc = main(["stokes", str(p), "--mosaic", LAY, "--mosaic-colour", "GBRG", "--out", str(tmp_path / "o")])
    assert rc == 2
    assert "62x48 pixels, not a multiple of the 4x4 colour mosaic" in capsys.readouterr().err


def test_option_helpers(frame):
    from cli.mosaic_options import mosaic_dataset_from_options

    assert mosaic_dataset_from_options([frame], {"mosaic": None}) is None
    ds = mosaic_dataset_from_options([frame], {"mosaic": LAY, "demosaic": "superpixel", "bit_depth": "16"})
    assert ds.attrs["demosaic"] == "superpixel" and ds.sizes["x"] == W // 2
    with pytest.raises(Exception, match="--bit-depth apply only to mosaic frames"):
        mosaic_dataset_from_options([frame], {"mosaic": None, "bit_depth": "12"})
