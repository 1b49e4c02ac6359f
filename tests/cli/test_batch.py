"""The ``polarsky batch`` command line: dry run, bad input, subprocess."""

from __future__ import annotations

import json
import subprocess
import sys

from polarsky.cli.main import main
from polarsky.synthetic.tree import write_bracket


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
    assert main(["batch", str(tmp_path), "--list", "--json", "--angles", "0,60,120", "--time-gap-s", "5"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert [len(b["frames"]) for b in result["brackets"]] == [3, 3]
    assert result["brackets"][0]["angles_deg"] == [0.0, 60.0, 120.0]


def test_bad_input_exits_2_with_one_error_line(tmp_path, capsys):
    root = _tree(tmp_path / "in")
    cases = [
        (["batch", str(root)], "--out DIR is required"),
        (["batch", str(tmp_path / "none"), "--out", str(tmp_path / "o")], "is not a folder"),
        (["batch", str(root), "--out", str(root / "a" / "pier_000deg.tif")], "is a file"),
        (["batch", str(root), "--out", str(tmp_path / "o"), "--workers", "2", "--scheduler", "tcp://127.0.0.1:1"],
         "--workers sizes the local cluster"),
        (["batch", str(root), "--list", "--angles", "0,x,90"], "--angles"),
        (["batch", str(root), "--list", "--region", "1,2,3"], "region"),
        (["batch", str(root), "--list", "--time-gap-s", "-1"], "--time-gap-s"),
    ]
    for args, match in cases:
        assert main(args) == 2, args
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and err[0].startswith("error: ") and match in err[0], (args, err)
    assert not (tmp_path / "o").exists()  # nothing made for a bad ROOT
    cfg = tmp_path / "bad.toml"
    cfg.write_text("[read]\ntransfr = 'srgb'\n")
    assert main(["batch", str(root), "--list", "--config", str(cfg)]) == 2
    err = capsys.readouterr().err
    assert "bad.toml [read]: unknown key 'transfr'" in err and err.count("\n") == 1
    cfg.write_text("[advice]\nregion = [0, 0, 4, 4]\n")
    assert main(["batch", str(root), "--list", "--config", str(cfg)]) == 2
    assert "[advice] is not a batch settings table" in capsys.readouterr().err


def test_mosaic_options_need_a_cell(tmp_path, capsys):
    root = _tree(tmp_path / "in")
    assert main(["batch", str(root), "--out", str(tmp_path / "o"), "--demosaic", "bilinear"]) == 2
    assert "--demosaic apply only to mosaic frames" in capsys.readouterr().err
    assert not (tmp_path / "o").exists()


def test_subprocess_list(tmp_path):
    """As a subprocess (the SIGKILL test in tests/batch/test_runner_kill.py runs whole batches this way)."""
    root = _tree(tmp_path / "in")
    r = subprocess.run([sys.executable, "-m", "polarsky", "batch", str(root), "--list", "--json"], cwd=tmp_path,
                       capture_output=True, text=True, timeout=60)
    assert r.returncode == 0 and r.stderr == ""
    assert json.loads(r.stdout)["count"] == 3
    r = subprocess.run([sys.executable, "-m", "polarsky", "batch", str(root), "--list", "--time-gap-s", "x"],
                       cwd=tmp_path, capture_output=True, text=True, timeout=60)
    assert r.returncode == 2 and r.stderr.startswith("error: ") and r.stderr.count("\n") == 1
