"""Nothing lost: SIGKILL the whole batch part-way, run it again, compare with a clean run.

The batch runs as a subprocess (``python -m polarsky batch ...``) with its own local
cluster; the test watches the output folder the whole time.
"""

from __future__ import annotations

import csv
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np

from polarsky.batch import state
from polarsky.cli.main import main
from polarsky.synthetic.tree import write_bracket

N_BRACKETS = 10


def _complete_folders(out: Path, problems: list) -> dict:
    """Final-named bracket folders and their run ids; any incomplete one is a problem."""
    found = {}
    for d in out.iterdir() if out.is_dir() else ():
        if d.name.startswith(".") or not d.is_dir():
            continue
        marker = state.read_complete(d)
        if marker is None:
            problems.append(f"{d.name} visible but incomplete: {sorted(p.name for p in d.iterdir())}")
        else:
            found[d.name] = marker["run_id"]
    for f in ("summary.csv", "report.html"):
        p = out / f
        if p.exists():
            text = p.read_text()
            if (f == "summary.csv" and not text.endswith("\n")) or (f == "report.html" and "</html>" not in text):
                problems.append(f"{f} half-written")
    return found


def _nc_arrays(path: Path) -> dict:
    with h5py.File(path, "r") as f:
        return {k: f[k][()] for k in f if isinstance(f[k], h5py.Dataset) and f[k].ndim == 3}


def _summary_rows(path: Path) -> dict:
    with open(path, newline="") as fh:
        return {r["name"]: {k: v for k, v in r.items() if k not in ("time_s", "status")}
                for r in csv.DictReader(fh)}


def test_sigkill_part_way_then_rerun_matches_a_clean_run(tmp_path):
    root = tmp_path / "in"
    for i in range(N_BRACKETS):
        write_bracket(root / ("north" if i % 2 else "south"), f"frame{i:02d}", height=64, width=96, seed=i)
    cfg = tmp_path / "batch.toml"
    cfg.write_text("[output]\npictures = false\n[cluster]\nworkers = 2\n")
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "polarsky", "batch", str(root), "--out", str(out), "--config", str(cfg)]

    err_log = tmp_path / "killed-run.stderr"
    with open(err_log, "wb") as err:
        proc = subprocess.Popen(cmd, cwd=tmp_path, stdout=subprocess.DEVNULL, stderr=err, start_new_session=True)
    problems: list = []
    done_before: dict = {}
    deadline = time.monotonic() + 90
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            done_before = _complete_folders(out, problems)
            if done_before:
                break
            time.sleep(0.002)
    finally:
        os.killpg(proc.pid, signal.SIGKILL)  # the driver, its scheduler, nannies and workers
        proc.wait(30)
    assert proc.returncode == -signal.SIGKILL, err_log.read_text()
    done_before = _complete_folders(out, problems)
    assert not problems, problems
    assert 0 < len(done_before) < N_BRACKETS, "the kill should land part-way through the batch"

    rerun = subprocess.run(cmd + ["--json"], cwd=tmp_path, capture_output=True, text=True, timeout=180)
    assert rerun.returncode == 0, rerun.stderr
    assert rerun.stderr == ""  # --json and no terminal: no progress bar, nothing else
    result = json.loads(rerun.stdout)
    status = {r["name"]: r["status"] for r in result["rows"]}
    assert len(status) == N_BRACKETS
    # every bracket done exactly once: the ones finished before the kill are kept, the rest done now
    assert {n for n, s in status.items() if s == "skipped"} == set(done_before)
    assert {n for n, s in status.items() if s == "done"} == set(status) - set(done_before)
    after = _complete_folders(out, problems)
    assert not problems, problems
    assert set(after) == set(status)
    assert all(after[n] == run for n, run in done_before.items())
    assert not (out / state.TMP_DIR).exists()
    assert not [p for p in out.rglob("*") if p.name.startswith(".polarsky-staging")]

    clean = tmp_path / "clean"
    assert main(["batch", str(root), "--out", str(clean), "--config", str(cfg), "--json"]) == 0
    assert _summary_rows(out / "summary.csv") == _summary_rows(clean / "summary.csv")
    for name in status:
        a, b = _nc_arrays(out / name / "stokes.nc"), _nc_arrays(clean / name / "stokes.nc")
        assert a.keys() == b.keys() and a
        for k in a:
            np.testing.assert_array_equal(a[k], b[k])
        sa = json.loads((out / name / "summary.json").read_text())
        sb = json.loads((clean / name / "summary.json").read_text())
        sa.pop("timing_s"), sb.pop("timing_s")
        assert sa == sb
