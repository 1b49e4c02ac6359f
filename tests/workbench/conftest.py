"""Fixtures of the workbench tests: invented brackets rendered here, a running workbench.

The brackets are smooth synthetic scenes (tests/synth.py) with a saturated spot, so that
the page has invalid pixels to draw.  The workbench runs in-process on a thread (the
command-line tests start real processes).
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

from tests.synth import render_frames, smooth_scene, write_pngs

ROOT = Path(__file__).resolve().parents[2]
ANGLES = [0, 45, 90, 135]


def load_tool():
    """tools/workbench_screenshot.py (its Page class drives Chromium)."""
    spec = importlib.util.spec_from_file_location("workbench_screenshot", ROOT / "tools" / "workbench_screenshot.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def scene(h=90, w=140, *, channels=1, seed=0, turn_deg=0.0):
    """Stokes maps (3, C, h, w) of an invented scene, optionally with the AoLP turned by
    ``turn_deg`` (a rotation of the linear part: S1 + i S2 times exp(2i turn)), with a bright
    spot that saturates every frame."""
    s = smooth_scene(h, w, channels=channels, seed=seed)
    t = np.radians(2 * turn_deg)
    s1, s2 = s[1] * np.cos(t) - s[2] * np.sin(t), s[1] * np.sin(t) + s[2] * np.cos(t)
    s = np.stack([s[0], s1, s2])
    s[0, :, 10:14, 20:25] = 4.0  # saturates in every frame: must be drawn checkered
    return s


def write_bracket(folder, *, stem="scene", channels=1, seed=0, turn_deg=0.0, h=90, w=140):
    s = scene(h, w, channels=channels, seed=seed, turn_deg=turn_deg)
    return write_pngs(folder, render_frames(s, ANGLES), ANGLES, bits=16, stem=stem)


@pytest.fixture(scope="module")
def bracket(tmp_path_factory):
    """A monochrome 16-bit bracket and its stokes.nc (made by 'polarsky stokes'; float32 as
    computed, so that values read from the page and from the file can be compared exactly)."""
    import warnings

    from polarsky.cli.main import main
    from polarsky.errors import PolarskyWarning

    base = tmp_path_factory.mktemp("wb-bracket")
    frames = write_bracket(base / "in")
    with warnings.catch_warnings():  # the saturated spot is reported; it is meant to be there
        warnings.simplefilter("ignore", PolarskyWarning)
        assert main(["stokes", *map(str, frames), "--out", str(base / "stokes"), "--precision", "full"]) == 0
    return frames, base / "stokes"


@pytest.fixture(scope="module")
def workbench(bracket, tmp_path_factory):
    from polarsky.workbench import prepare_workbench

    frames, _ = bracket
    out = tmp_path_factory.mktemp("wb-out")
    wb, _ = prepare_workbench([str(f) for f in frames], out, echo=lambda *a, **k: None)
    wb.start()
    yield wb
    wb.stop()


def advise_json(capsys, frames, region, protect=None, **options) -> str:
    """What ``polarsky advise FRAMES --region ... [--protect ...] [--OPTION VALUE] --json`` prints
    (in-process)."""
    import warnings

    from polarsky.cli.main import main
    from polarsky.errors import PolarskyWarning

    args = ["advise", *map(str, frames), "--region", region, "--json"]
    if protect:
        args += ["--protect", protect]
    for name, value in options.items():
        args += ["--" + name.replace("_", "-"), str(value)]
    capsys.readouterr()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", PolarskyWarning)
        assert main(args) == 0
    return capsys.readouterr().out
