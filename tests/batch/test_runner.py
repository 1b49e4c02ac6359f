"""Batches run through a real dask.distributed cluster on 127.0.0.1 (no mocks).

One cluster of two worker processes is shared by the tests of this module.
"""

from __future__ import annotations

import csv
import hashlib
import json
import logging
import os
import signal
import threading
import time
from pathlib import Path

import numpy as np
import pytest

from polarsky.batch import runner, state
from polarsky.batch.discover import Bracket
from polarsky.batch.runner import run_batch
from polarsky.batch.task import SUMMARY_COLUMNS, process_bracket
from polarsky.errors import InputError
from polarsky.options.settings import Settings
from polarsky.synthetic.tree import write_bracket
from polarsky.write.stage import FolderLock


def _warm():
    import polarsky.batch.report  # noqa: F401  (imports the heavy modules once per worker)
    import polarsky.tasks.advise  # noqa: F401
    import polarsky.tasks.stokes  # noqa: F401

    return os.getpid()


def _settings(**options):
    return Settings.from_options(options)


@pytest.fixture(scope="module")
def client(tmp_path_factory):
    from distributed import Client, LocalCluster

    scratch = tmp_path_factory.mktemp("dask-scratch")
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address="127.0.0.1:0", scheduler_kwargs={"dashboard": False},
                      worker_dashboard_address=None, local_directory=str(scratch),
                      silence_logs=logging.CRITICAL) as cluster, Client(cluster) as c:
        c.run(_warm)
        yield c


def _tree(root: Path) -> Path:
    """Three good name brackets, one manifest bracket, one corrupt frame, one missing frame."""
    for i in range(3):
        write_bracket(root / "day1", f"pier{i}", seed=i)
    write_bracket(root / "day2" / "tower", "t", manifest=True, seed=4)
    bad = write_bracket(root / "day2", "corrupt", seed=5)
    bad[1].write_bytes(b"II*\x00 this is not a TIFF any more")
    gone = write_bracket(root / "day3" / "lost", "l", manifest=True, seed=6)
    gone[3].unlink()
    return root


def _snapshot(root: Path) -> dict:
    out = {}
    for p in sorted(root.rglob("*")):
        if p.is_file():
            st = p.stat()
            out[str(p)] = (st.st_mtime_ns, st.st_size, hashlib.sha256(p.read_bytes()).hexdigest(), st.st_mode)
    return out


FAST = {"pictures": False}  # the PNG maps are slow; most tests do not need them


def _rows_csv(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def first_run(client, tmp_path_factory):
    base = tmp_path_factory.mktemp("batch")
    root = _tree(base / "in")
    before = _snapshot(root)
    result = run_batch(root, base / "out", settings=_settings(**FAST), client=client)
    return base, root, before, result


def test_batch_through_a_real_cluster(first_run):
    base, root, _, result = first_run
    out = base / "out"
    status = {r["name"]: r["status"] for r in result["rows"]}
    assert status == {"day1__pier0": "done", "day1__pier1": "done", "day1__pier2": "done",
                      "day2__tower": "done", "day2__corrupt": "failed", "day3__lost": "failed"}
    assert (result["done"], result["skipped"], result["failed"]) == (4, 0, 2)
    for name, s in status.items():
        folder = out / name
        if s == "done":
            assert (folder / "stokes.nc").is_file() and (folder / "summary.json").is_file()
            assert state.read_complete(folder) is not None
            assert (folder / "thumb_frame.png").is_file()
        else:
            assert not folder.exists()
    assert not (out / state.TMP_DIR).exists() and not (out / runner.SCRATCH_DIR).exists()
    rows = _rows_csv(out / "summary.csv")
    assert [r["name"] for r in rows] == [r["name"] for r in result["rows"]]
    assert list(rows[0]) == SUMMARY_COLUMNS
    good = [r for r in rows if r["status"] == "done"]
    # The invented scene has DoLP 0.6 (0.3 + 0.7 y/(H-1)), i.e. a mean of 0.39 (our own render).
    assert all(abs(float(r["mean_dolp"]) - 0.39) < 0.01 for r in good)
    assert all(float(r["time_s"]) > 0 for r in good)
    assert [r["analyzer_angles_deg"] for r in good][0] == "0,45,90,135"  # the --angles form
    html = (out / "report.html").read_text()
    assert all(f'data-name="{n}"' in html for n in status)


def test_failures_carry_the_reason(first_run):
    rows = {r["name"]: r for r in first_run[3]["rows"]}
    assert "corrupt_045deg.tif" in rows["day2__corrupt"]["error"]
    assert "names 'l_3.tif', which does not exist" in rows["day3__lost"]["error"]


def test_inputs_are_never_modified(first_run):
    base, root, before, _ = first_run
    assert _snapshot(root) == before


def test_results_equal_direct_stokes_call(first_run, tmp_path):
    """The batch writes what the Stokes step writes for the same frames."""
    import xarray as xr

    base, root, _, _ = first_run
    from polarsky.tasks.stokes import run_stokes

    frames = sorted((root / "day1").glob("pier0_*deg.tif"))
    run_stokes([str(f) for f in frames], tmp_path / "direct", angles="0,45,90,135", pictures=False)
    with xr.open_dataset(tmp_path / "direct" / "stokes.nc") as a, \
            xr.open_dataset(base / "out" / "day1__pier0" / "stokes.nc") as b:
        for v in ("S0", "S1", "S2", "dolp", "aolp"):
            np.testing.assert_array_equal(a[v].values, b[v].values)


def test_advice_reaches_summary_and_frame_thumbnail(client, tmp_path):
    from PIL import Image

    root = tmp_path / "in"
    write_bracket(root, "lake", height=48, width=64, seed=3)
    out = tmp_path / "out"
    # (the DoLP/AoLP thumbnails of the PNG maps are checked in test_report_browser.py)
    settings = _settings(region=[8, 8, 40, 30], pictures=False)
    result = run_batch(root, out, settings=settings, client=client)
    (row,) = result["rows"]
    assert row["status"] == "done", row["error"]
    folder = out / row["name"]
    assert (folder / "advice.json").is_file() and not (folder / "dolp.png").exists()
    advice = json.loads((folder / "advice.json").read_text())
    assert row["best_angle_deg"] == pytest.approx(advice["best_angle_deg"], abs=1e-6)
    assert row["reduction_stops"] == pytest.approx(advice["reduction_stops"], abs=1e-6)
    with Image.open(folder / "thumb_frame.png") as im:
        assert max(im.size) <= settings.report.thumbnail_px
    csv_row = _rows_csv(out / "summary.csv")[0]
    assert float(csv_row["best_angle_deg"]) == pytest.approx(advice["best_angle_deg"], abs=1e-5)


def test_rerun_skips_unchanged_and_redoes_changed(first_run, client):
    base, root, before, result = first_run
    out = base / "out"
    again = run_batch(root, out, settings=_settings(**FAST), client=client)
    st = {r["name"]: r["status"] for r in again["rows"]}
    assert st["day1__pier0"] == st["day2__tower"] == "skipped"
    assert st["day2__corrupt"] == "failed"  # failures are always retried
    # a skipped row repeats the stored numbers
    first = {r["name"]: r for r in result["rows"]}
    assert again["rows"][0]["mean_dolp"] == first["day1__pier0"]["mean_dolp"]
    # change one input: only that bracket is redone
    write_bracket(root / "day1", "pier1", seed=9)
    marker0 = json.loads((out / "day1__pier0" / state.MARKER).read_text())
    third = run_batch(root, out, settings=_settings(**FAST), client=client)
    st = {r["name"]: r["status"] for r in third["rows"]}
    assert st["day1__pier1"] == "done" and st["day1__pier0"] == st["day1__pier2"] == "skipped"
    assert json.loads((out / "day1__pier0" / state.MARKER).read_text())["run_id"] == marker0["run_id"]
    # a truncated output makes the bracket incomplete: redone
    nc = out / "day1__pier2" / "stokes.nc"
    nc.write_bytes(nc.read_bytes()[:100])
    # a changed setting redoes everything
    changed = run_batch(root, out, settings=_settings(angle_offset=2.0, **FAST), client=client)
    assert {r["status"] for r in changed["rows"]} == {"done", "failed"}
    assert _snapshot(root) != before  # (we rewrote pier1 ourselves above)


def test_worker_killed_mid_task_the_batch_still_completes(client, tmp_path):
    root = tmp_path / "in"
    for i in range(6):
        write_bracket(root, f"scene{i}", height=240, width=320, seed=i)
    out = tmp_path / "out"
    box: dict = {}
    t = threading.Thread(target=lambda: box.update(result=run_batch(root, out, settings=_settings(**FAST),
                                                                    client=client)))
    t.start()
    killed = None
    deadline = time.monotonic() + 60
    while killed is None and time.monotonic() < deadline and t.is_alive():
        tmp = out / state.TMP_DIR
        for d in (tmp.iterdir() if tmp.is_dir() else ()):
            parts = d.name.split(".")
            if len(parts) >= 3 and parts[-2].isdigit():
                killed = int(parts[-2])  # the worker that is writing this bracket right now
                os.kill(killed, signal.SIGKILL)
                break
        time.sleep(0.002)
    t.join(120)
    assert killed is not None, "no bracket was seen in progress"
    result = box["result"]
    assert [r["status"] for r in result["rows"]] == ["done"] * 6
    for r in result["rows"]:
        assert state.read_complete(out / r["name"]) is not None
    client.wait_for_workers(2, timeout=60)
    assert killed not in client.run(os.getpid).values()


def test_local_cluster_is_loopback_only_with_scratch_inside_out(tmp_path, monkeypatch):
    import psutil

    # (a cluster started earlier in this process with dask's defaults leaves this variable here)
    monkeypatch.delenv("MALLOC_TRIM_THRESHOLD_", raising=False)
    scratch = tmp_path / "out" / runner.SCRATCH_DIR
    with runner.batch_client(workers=1, scheduler=None, scratch=scratch) as c:
        env = c.run(lambda: {k: os.environ.get(k) for k in ("NUMBA_NUM_THREADS", "POLARSKY_THREADS",
                                                             "MALLOC_TRIM_THRESHOLD_")})
        # one thread per worker (kernels, polarsky's pool); the C library's allocator as in a plain process
        assert list(env.values()) == [{"NUMBA_NUM_THREADS": "1", "POLARSKY_THREADS": "1", "MALLOC_TRIM_THRESHOLD_": None}]
        info = c.scheduler_info()
        assert info["address"].startswith("tcp://127.0.0.1:")
        assert all(a.startswith("tcp://127.0.0.1:") for a in info["workers"])
        dirs = c.run(lambda dask_worker: dask_worker.local_directory)
        assert all(Path(d).resolve().is_relative_to(scratch.resolve()) for d in dirs.values())
        pids = list(c.run(os.getpid).values()) + [os.getpid()]
        listening = [conn.laddr.ip for pid in pids for conn in psutil.Process(pid).net_connections("inet")
                     if conn.status == psutil.CONN_LISTEN]
        assert listening and set(listening) == {"127.0.0.1"}
        assert c.dashboard_link is None or "127.0.0.1" in c.dashboard_link


def test_unreachable_scheduler_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="cannot reach the dask scheduler"):
        with runner.batch_client(workers=1, scheduler="tcp://127.0.0.1:9", scratch=tmp_path, connect_timeout_s=1):
            pass


def test_a_name_that_would_escape_is_refused(tmp_path):
    frames = write_bracket(tmp_path / "in", "a")
    b = Bracket(name="../escape", label="x", frames=tuple(frames), angles_deg=(0, 45, 90, 135), manifest=None,
                rule="name", reason="test")
    row = process_bracket({"bracket": b, "out_dir": str(tmp_path / "out"), "settings": Settings(), "sky": False,
                           "run_id": "t"})
    assert row["status"] == "failed" and "unsafe bracket name" in row["error"]
    assert not (tmp_path / "escape").exists()


def test_odd_folder_names_stay_inside_the_output(client, tmp_path):
    root = tmp_path / "in"
    write_bracket(root / "odd..name", "x..y", seed=1)
    write_bracket(root / "sp ace" / "-dash", "z", seed=2)
    out = tmp_path / "out"
    result = run_batch(root, out, settings=_settings(**FAST), client=client)
    assert [r["status"] for r in result["rows"]] == ["done", "done"]
    made = [p for p in tmp_path.rglob("*") if not p.is_relative_to(root)]
    assert made and all(p.resolve().is_relative_to(out.resolve()) for p in made)
    assert {p.name for p in out.iterdir() if p.is_dir()} == {"odd..name__x..y", "sp_ace___dash__z"}


def test_concurrent_batch_on_same_output_is_refused(tmp_path):
    root = tmp_path / "in"
    write_bracket(root, "a")
    out = tmp_path / "out"
    out.mkdir()
    with FolderLock(out):
        with pytest.raises(InputError, match="another polarsky run is writing to"):
            run_batch(root, out, settings=_settings(**FAST))
    assert list(out.iterdir()) == []


def test_cli_json_on_an_existing_scheduler_exit_status(client, tmp_path, capsys):
    from polarsky.cli.main import main

    root = tmp_path / "in"
    write_bracket(root, "ok", seed=1)
    address = client.scheduler.address
    assert main(["batch", str(root), "--out", str(tmp_path / "out"), "--scheduler", address,
                 "--no-pictures", "--json"]) == 0
    out = capsys.readouterr().out
    result = json.loads(out)  # exactly one JSON object on stdout
    assert result["done"] == 1 and result["failed"] == 0 and result["rows"][0]["name"] == f"{root.name}__ok"
    write_bracket(root, "short", angles_deg=(0, 90), seed=2)
    assert main(["batch", str(root), "--out", str(tmp_path / "out"), "--scheduler", address,
                 "--no-pictures"]) == 1
    text = capsys.readouterr().out
    assert "0 done, 1 unchanged (kept), 1 failed" in text
    assert f"failed {root.name}__short: only 2 frame(s)" in text


def test_progress_bar_counts_done_and_failed(client, tmp_path, capsys):
    root = tmp_path / "in"
    write_bracket(root, "ok", seed=1)
    write_bracket(root, "few", angles_deg=(0, 90), seed=2)
    run_batch(root, tmp_path / "out", settings=_settings(**FAST), client=client, progress=True)
    err = capsys.readouterr().err
    assert "2/2" in err and "failed=1" in err and "done=1" in err and "bracket/s" in err


def test_dashboard_when_asked_is_on_loopback(tmp_path):
    import importlib.util

    if importlib.util.find_spec("bokeh") is None:
        with pytest.raises(InputError, match="--dashboard needs the bokeh package"):
            with runner.batch_client(workers=1, scheduler=None, scratch=tmp_path / "s", dashboard=True):
                pass
        return
    with runner.batch_client(workers=1, scheduler=None, scratch=tmp_path / "s", dashboard=True) as c:
        assert c.dashboard_link.startswith("http://127.0.0.1:")


def test_a_file_name_that_is_not_utf8_still_gives_the_summary_and_report(client, tmp_path):
    # the rows travel from the workers through dask's messages and into UTF-8 files
    root = tmp_path / "in"
    frames = write_bracket(root / "ok", "pier", seed=1)
    odd = root / "odd"
    odd.mkdir()
    for f in frames:
        f.rename(odd / os.fsdecode(f.name.replace("pier", "p\xe8r").encode("latin-1")))
    write_bracket(root / "ok", "pier", seed=1)
    result = run_batch(root, tmp_path / "out", settings=_settings(**FAST), client=client)
    assert sorted(r["status"] for r in result["rows"]) == ["done", "done"]
    odd_row = next(r for r in result["rows"] if r["name"].startswith("odd"))
    assert odd_row["source"] == "odd/p\ufffdr"
    assert (tmp_path / "out" / "summary.csv").read_text(encoding="utf-8").count("\n") == 3
    assert odd_row["name"] == "odd__p_r" and odd_row["name"] in (tmp_path / "out" / "report.html").read_text("utf-8")


def test_out_equal_to_the_batch_root_does_not_rescan_its_own_outputs(client, tmp_path):
    root = tmp_path / "in"
    write_bracket(root / "a", "pier", seed=1)
    first = run_batch(root, root, settings=_settings(**FAST), client=client)
    again = run_batch(root, root, settings=_settings(**FAST), client=client)
    assert [r["name"] for r in first["rows"]] == [r["name"] for r in again["rows"]] == ["a__pier"]
    assert [r["status"] for r in again["rows"]] == ["skipped"]

