"""The console command: help, version, packaging, the demo as a user runs it."""

from __future__ import annotations

import json
import pathlib
import subprocess
import sys

from polarsky.cli.main import main


def test_help_lists_commands(capsys):
    assert main(["--help"]) == 0
    out = capsys.readouterr().out
    for name in ("stokes", "advise", "demo", "calibrate"):
        assert name in out
    assert "counter-clockwise" in out


def test_stokes_json_prints_one_object(png_bracket, tmp_path, capsys):
    paths, _ = png_bracket
    assert main(["stokes", *map(str, paths), "--out", str(tmp_path / "o"), "--json"]) == 0
    out = capsys.readouterr().out
    js = json.loads(out)
    assert out.count("\n") == 1 and js["frames"] == 4


def test_demo_subprocess(tmp_path):
    r = subprocess.run([sys.executable, "-m", "polarsky", "demo", "--out", str(tmp_path / "d"), "--json"],
                       cwd=tmp_path, capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    rep = json.loads(r.stdout)
    assert abs((rep["best_angle_deg"] - rep["true_best_angle_deg"] + 90) % 180 - 90) < 1.0
    assert abs(rep["sky_yaw_deg"] - rep["true_sky_yaw_deg"]) < 1.0
    for sub in rep["outputs"]:
        assert (tmp_path / "d" / sub).exists(), sub
    for sub in ("stokes", "advice", "advice-protect", "sky"):
        assert (tmp_path / "d" / sub).is_dir()
    assert (tmp_path / "d" / "stokes" / "polarization.png").stat().st_size > 10_000
    # the frames each result records are where they lie once the demo folder is published
    summary = json.loads((tmp_path / "d" / "stokes" / "summary.json").read_text())
    assert summary["inputs"] and all(pathlib.Path(p).is_file() for p in summary["inputs"])
    from polarsky.read.stokes_file import read_stokes

    assert read_stokes(tmp_path / "d" / "stokes" / "stokes.nc")["attrs"]["inputs"] == summary["inputs"]
