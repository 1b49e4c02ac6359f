"""``polarsky workbench`` as a real process: the printed address, Ctrl-C, bad input."""

from __future__ import annotations

import os
import re
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

from .conftest import write_bracket

ROOT = Path(__file__).resolve().parents[2]
ADDRESS = re.compile(r"^open (http://127\.0\.0\.\d+:(\d+)/\?token=([A-Za-z0-9_-]+))$", re.M)


def start(args, cwd):
    env = dict(os.environ, PYTHONPATH=str(ROOT), PYTHONUNBUFFERED="1")
    return subprocess.Popen([sys.executable, "-m", "polarsky", "workbench", *args, "--no-browser"], cwd=cwd, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def wait_for_address(proc, timeout_s=60):
    lines = []
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        line = proc.stdout.readline()
        if not line:
            break
        lines.append(line)
        m = ADDRESS.match(line.strip())
        if m:
            return m, "".join(lines)
    proc.kill()
    out, err = proc.communicate()
    raise AssertionError(f"no address printed:\n{''.join(lines)}{out}\n{err}")


def interrupt(proc):
    """Ctrl-C; returns (stdout, stderr) (the process is killed if it does not stop)."""
    try:
        proc.send_signal(signal.SIGINT)
        return proc.communicate(timeout=20)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.communicate()


def run(args, cwd, timeout_s=60):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.run([sys.executable, "-m", "polarsky", "workbench", *args, "--no-browser"], cwd=cwd, env=env,
                          capture_output=True, text=True, timeout=timeout_s)


@pytest.fixture(scope="module")
def frames(tmp_path_factory):
    return write_bracket(tmp_path_factory.mktemp("cli") / "in", h=40, w=60)


def test_prints_the_address_serves_and_stops_on_ctrl_c(frames, tmp_path):
    proc = start([*map(str, frames), "--out", str(tmp_path / "out")], tmp_path)
    try:
        m, printed = wait_for_address(proc)
        url, port, token = m.group(1), int(m.group(2)), m.group(3)
        assert "ready in" in printed
        with urllib.request.urlopen(url, timeout=10) as r:
            assert r.status == 200 and b"polarsky" in r.read()
        with pytest.raises(urllib.error.HTTPError) as e:
            urllib.request.urlopen(f"http://127.0.0.1:{port}/?token=x{token}", timeout=10)
        assert e.value.code == 403
        e.value.close()
    finally:
        out, err = interrupt(proc)
    assert proc.returncode == 0, err
    assert "workbench stopped" in out
    assert "Traceback" not in err and "error" not in err
    with socket.socket() as s:  # nothing listens there any more (closed connections may linger in TIME_WAIT)
        s.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        s.bind(("127.0.0.1", port))
    assert not (tmp_path / "out").exists()  # nothing saved, nothing written


def test_port_in_use_is_a_clear_error(frames, tmp_path):
    with socket.socket() as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        port = busy.getsockname()[1]
        r = run([*map(str, frames), "--port", str(port)], tmp_path)
    assert r.returncode == 2
    assert r.stderr.strip() == (f"error: port {port} on 127.0.0.1 is in use; "
                                "give another --port, or --port 0 for a free one")


def test_folder_without_a_bracket_is_a_clear_error(tmp_path):
    empty = tmp_path / "empty"
    empty.mkdir()
    (empty / "notes.txt").write_text("no frames here")
    r = run([str(empty)], tmp_path)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"error: no bracket found in {empty}")
    r = run([str(tmp_path / "missing")], tmp_path)
    assert r.returncode == 2 and "does not exist" in r.stderr and "Traceback" not in r.stderr
    r = run([str(tmp_path / "missing"), "--watch"], tmp_path)
    assert r.returncode == 2 and "--watch follows one folder" in r.stderr


def test_another_host_prints_a_warning(frames, tmp_path):
    proc = start([*map(str, frames), "--host", "127.0.0.2"], tmp_path)
    try:
        m, _ = wait_for_address(proc)
        assert m.group(1).startswith("http://127.0.0.2:")
    finally:
        out, err = interrupt(proc)
    assert proc.returncode == 0
    assert "warning: --host 127.0.0.2 makes the workbench reachable from other machines" in err


def test_the_options_come_from_the_options_table(frames, tmp_path):
    r = run([*map(str, frames), "--port", "70000"], tmp_path)
    assert r.returncode == 2
    assert r.stderr.strip() == "error: --port must be a port number from 0 to 65535 (0: any free port), got '70000'"
    r = run([*map(str, frames), "--host", "127.0.0.1/8"], tmp_path)
    assert r.returncode == 2 and r.stderr.startswith("error: --host must be an address of this machine")
    r = run([], tmp_path)
    assert r.returncode == 2 and "give a bracket's frames" in r.stderr
    r = run([*map(str, frames), "--demosaic", "newton"], tmp_path)  # a mosaic option without --mosaic
    assert r.returncode == 2 and "apply only to mosaic frames" in r.stderr
