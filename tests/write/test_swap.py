"""An output folder holds all of one run or none of it, even when a run is killed while it
publishes, or two runs write to one --out at once (polarsky.write.swap, polarsky.write.stage).

The killed runs are real processes (``python -c`` running the command line) that kill
themselves at a chosen point of publishing; the folder is checked afterwards.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from polarsky.cli.main import main
from polarsky.tasks.stokes import run_stokes
from polarsky.write.stage import MARKER, OutputStage
from polarsky.write.swap import OLD, STAGING, clean_leftovers, clean_leftovers_in, swap_in
from tests.synth import render_frames, smooth_scene, write_pngs

ROOT = Path(__file__).resolve().parents[2]

#: The command line, with the exchange of folders wrapped: {before} and {after} run around it.
_WRAPPED = """
import os, signal, sys, time
from pathlib import Path
from polarsky.write import swap
real = swap._exchange
def exchange(a, b):
{before}
    done = real(a, b)
{after}
    return done
swap._exchange = exchange
from polarsky.cli.main import main
sys.exit(main(sys.argv[1:]))
"""


@pytest.fixture(scope="module")
def brackets(tmp_path_factory):
    """A 4-frame and a 3-frame bracket of one small invented scene."""
    root = tmp_path_factory.mktemp("brackets")
    s = smooth_scene(12, 16)
    four = write_pngs(root / "four", render_frames(s, [0, 45, 90, 135]), [0, 45, 90, 135])
    three = write_pngs(root / "three", render_frames(s, [0, 60, 120]), [0, 60, 120])
    return four, three


def _visible(folder: Path) -> list:
    return sorted(p.name for p in folder.iterdir() if not p.name.startswith("."))


def _whole(out: Path) -> dict:
    """The summary of a complete folder (its marker lists exactly the files it holds)."""
    marker = json.loads((out / MARKER).read_text())
    assert marker["outputs"] == _visible(out)
    return json.loads((out / "summary.json").read_text())


def _hidden_beside(out: Path) -> list:
    return sorted(p.name for p in out.parent.iterdir() if p.name.startswith(f".{out.name}."))


def _run_wrapped(args, *, before="    pass", after="    pass"):
    code = _WRAPPED.format(before=before, after=after)
    return subprocess.run([sys.executable, "-c", code, *map(str, args)], cwd=ROOT, capture_output=True, text=True,
                          timeout=120)


@pytest.mark.parametrize("where, sig, frames", [
    ("after", signal.SIGKILL, 3),   # killed right after the exchange: the new run is in place, the old one aside
    ("before", signal.SIGKILL, 4),  # killed before it: the earlier run stays, the complete staging folder aside
    ("before", signal.SIGTERM, 3),  # SIGTERM while publishing waits for the exchange, then unwinds
])
def test_a_run_stopped_while_publishing_leaves_one_whole_run(brackets, tmp_path, where, sig, frames):
    four, three = brackets
    out = tmp_path / "out"
    run_stokes(four, out, pictures=False)
    hook = f"    os.kill(os.getpid(), {int(sig)})"
    r = _run_wrapped(["stokes", *three, "--out", out, "--no-pictures"], **{where: hook})
    assert _whole(out)["frames"] == frames and "residual" not in _visible(out)
    if sig == signal.SIGKILL:
        assert r.returncode == -signal.SIGKILL
        assert _hidden_beside(out)  # what the killed run could not remove ...
        run_stokes(four if frames == 3 else three, out, pictures=False)
        assert _hidden_beside(out) == []  # ... the next run into the folder removes
    else:
        assert r.returncode == 128 + signal.SIGTERM
        assert r.stderr.splitlines() == ["error: interrupted (no output folder was left half-written)"]
        assert _hidden_beside(out) == []


def test_sigterm_before_publishing_keeps_the_earlier_run_and_leaves_nothing(brackets, tmp_path):
    four, three = brackets
    out = tmp_path / "out"
    run_stokes(four, out, pictures=False)
    code = ("import os, signal, sys\nfrom polarsky.write import stage\n"
            "stage.OutputStage.publish = lambda self: os.kill(os.getpid(), signal.SIGTERM)\n"
            "from polarsky.cli.main import main\nsys.exit(main(sys.argv[1:]))\n")
    r = subprocess.run([sys.executable, "-c", code, "stokes", *map(str, three), "--out", str(out), "--no-pictures"],
                       cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert r.returncode == 128 + signal.SIGTERM
    assert r.stderr.splitlines() == ["error: interrupted (no output folder was left half-written)"]
    assert _whole(out)["frames"] == 4 and _hidden_beside(out) == []


def test_a_run_killed_between_two_renames_gets_its_earlier_result_back(tmp_path):
    # where folders cannot be exchanged in one step, the old folder is renamed aside first
    out = tmp_path / "out"
    with OutputStage(out, command="test") as stage:
        stage.path("old.txt").write_text("old")
        stage.publish()
    aside = tmp_path / f".out.{OLD}-1-0123abcd"
    os.rename(out, aside)  # what a kill between the renames leaves
    clean_leftovers(out)
    assert _visible(out) == ["old.txt"] and _hidden_beside(out) == []


def test_swap_replaces_a_folder_whole_and_a_batch_cleans_every_bracket(tmp_path):
    out, new = tmp_path / "b", tmp_path / ".b.polarsky-staging-7-0badf00d"
    out.mkdir()
    (out / "a.png").write_text("old")
    new.mkdir()
    (new / "b.png").write_text("new")
    swap_in(new, out)
    assert _visible(out) == ["b.png"] and not new.exists()
    (tmp_path / f".c.{STAGING}-9-00000000").mkdir()
    (tmp_path / f".d.{OLD}-9-00000000").mkdir()  # bracket d was being replaced and is gone: restored
    clean_leftovers_in(tmp_path)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b", "d"]


def test_two_runs_into_one_out_at_once_never_mix(brackets, tmp_path, capsys):
    four, three = brackets
    out = tmp_path / "out"
    go = tmp_path / "go"
    code = ("import sys, time\nfrom pathlib import Path\nfrom polarsky.write import stage\n"
            "real = stage.OutputStage.publish\n"
            "def publish(self):\n"
            f"    while not Path({str(go)!r}).exists():\n"
            "        time.sleep(0.02)\n"
            "    return real(self)\n"
            "stage.OutputStage.publish = publish\n"
            "from polarsky.cli.main import main\nsys.exit(main(sys.argv[1:]))\n")
    first = subprocess.Popen([sys.executable, "-c", code, "stokes", *map(str, four), "--out", str(out),
                              "--no-pictures"], cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 60
        while not any(STAGING in n for n in _hidden_beside(out)):  # the first run has its staging folder
            if first.poll() is not None or time.monotonic() > deadline:
                pytest.fail(f"the first run did not start writing: {first.stderr.read() if first.poll() else ''}")
            time.sleep(0.02)
        # the first run is writing: the second stops with one line and touches nothing
        assert main(["stokes", *map(str, three), "--out", str(out), "--no-pictures"]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and err[0].startswith(f"error: another polarsky run is writing to {out}")
        assert not out.exists()
    finally:
        go.touch()
        _, stderr = first.communicate(timeout=60)
    assert first.returncode == 0, stderr
    assert _whole(out)["frames"] == 4 and "residual.png" not in _visible(out)
    # a re-run with 3 frames after one with 4: nothing of the 4-frame run is left
    run_stokes(four, out)
    assert "residual.png" in _visible(out)
    run_stokes(three, out)
    assert "residual.png" not in _visible(out) and _whole(out)["frames"] == 3
