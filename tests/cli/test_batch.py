"""The ``polarsky batch`` command line: dry run, bad input, subprocess."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from cli.main import main
from polarsky.batch.synthetic import write_bracket

REPO = Path(__file__).resolve().parents[1]


def _tree(root):
    write_bracket(root / "a", "pier", seed=0)
    write_bracket(root / "b", "m", manifest=True, seed=1)
    write_bracket(root / "c", "few", angles_deg=(0, 90), seed=2)
    return root


def test_list_prints_brackets_and_reasons(tmp_path, capsys):
    root = _tree(tmp_path / "in")
    assert main(["batch", str(root), "--list"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith("a__pier  [name]  4 frames  4 files named pier + angle token (0, 45, 90, 135 deg)")
    assert out[1].startswith("b  [manifest]  4 frames  folder holds manifest.csv")
    assert out[2].startswith("c__few  [name]  2 frames") and "will fail: only 2 frame(s)" in out[3]
    assert out[-1] == f"3 brackets found under {root}"
    assert not (tmp_path / "out").exists()


def test_list_json_is_one_object(tmp_path, capsys):
    root = _tree(tmp_path / "in")
    assert main(["batch", str(root), "--list", "--json"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["count"] == 3 and result["problems"] == 1
    assert [b["rule"] for b in result["brackets"]] == ["name", "manifest", "name"]


def test_time_gap_and_angles_options_reach_discovery(tmp_path, capsys):
    import datetime as dt

    import numpy as np
    import tifffile

    t0 = dt.datetime(2024, 6, 1, 12, 0, 0)
    for k in range(6):
        when = t0 + dt.timedelta(seconds=(k // 3) * 30 + k % 3)
        tifffile.imwrite(tmp_path / f"s{k}.tif", np.full((4, 4), 900, np.uint16),
                         datetime=when.strftime("%Y:%m:%d %H:%M:%S"))
    assert main(["batch", str(tmp_path), "--list", "--json", "--angles", "0,60,120", "--time-gap", "5"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert [len(b["frames"]) for b in result["brackets"]] == [3, 3]
    assert result["brackets"][0]["angles_deg"] == [0.0, 60.0, 120.0]


def test_bad_input_exits_2_with_one_error_line(tmp_path, capsys):
    root = _tree(tmp_path / "in")
    cases = [
        (["batch", str(root)], "--out DIR is required"),
        (["batch", str(tmp_path / "none"), "--out", str(tmp_path / "o")], "is not a folder"),
        (["batch", str(root), "--out", str(root / "a" / "pier_000deg.tif")], "exists and is not a folder"),
        (["batch", str(root), "--out", str(tmp_path / "o"), "--workers", "2", "--scheduler", "tcp://127.0.0.1:1"],
         "--workers sizes the local cluster"),
        (["batch", str(root), "--list", "--angles", "0,x,90"], "--angles"),
        (["batch", str(root), "--list", "--region", "1,2,3"], "region"),
        (["batch", str(root), "--list", "--time-gap", "-1"], "time_gap_s"),
    ]
    for args, match in cases:
        assert main(args) == 2, args
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and err[0].startswith("error: ") and match in err[0], (args, err)
    assert not (tmp_path / "o").exists()  # nothing made for a bad ROOT
    cfg = tmp_path / "bad.toml"
    cfg.write_text("[stokes]\ntransfr = 'srgb'\n[advice]\nregion = [0, 0, 4, 4]\n")
    assert main(["batch", str(root), "--list", "--config", str(cfg)]) == 2
    err = capsys.readouterr().err
    assert "stokes.transfr" in err and "[advice]" in err


def test_mosaic_options_need_a_cell(tmp_path, capsys):
    root = _tree(tmp_path / "in")
    assert main(["batch", str(root), "--list", "--demosaic", "bilinear"]) == 2
    assert "applies only to mosaic frames" in capsys.readouterr().err


def test_mosaic_without_support_is_refused(tmp_path, capsys):
    from polarsky.batch.runner import mosaic_function

    if mosaic_function() is not None:  # mosaic support present: see test_batch_mosaic.py
        return
    root = _tree(tmp_path / "in")
    assert main(["batch", str(root), "--out", str(tmp_path / "o"), "--mosaic", "90,45;135,0"]) == 2
    assert "polarsky.mosaic is not available" in capsys.readouterr().err


def test_subprocess_list(tmp_path):
    """As a subprocess (the SIGKILL test in test_batch_kill.py runs whole batches this way)."""
    root = _tree(tmp_path / "in")
    r = subprocess.run([sys.executable, "-m", "cli.main", "batch", str(root), "--list", "--json"], cwd=REPO,
                       capture_output=True, text=True, timeout=60)
    assert r.returncode == 0 and r.stderr == ""
    assert json.loads(r.stdout)["count"] == 3
    r = subprocess.run([sys.executable, "-m", "cli.main", "batch", str(root), "--list", "--time-gap", "x"],
                       cwd=REPO, capture_output=True, text=True, timeout=60)
    assert r.returncode == 2 and r.stderr.startswith("error: ") and r.stderr.count("\n") == 1
