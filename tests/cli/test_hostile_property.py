"""The promise, for any file names, manifest and option values a user may type (hypothesis):
``polarsky stokes`` exits 0 with an output folder that holds exactly this run's files, or
exits 2 with one line ``error: ...`` and leaves the folder as it was; never a traceback, an
internal error, a stray library line, a mixed output folder, leftovers beside it, or a
changed input.

Frames are a small invented scene rendered by our own code (tests/synth.py); each example
runs the command line in-process once or twice into the same --out.
"""

from __future__ import annotations

import hashlib
import itertools
import json
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from polarsky.cli.main import main
from polarsky.write.stage import MARKER
from tests.synth import render_frames, smooth_scene

SCENE = smooth_scene(8, 12)
_COUNTER = itertools.count()

#: Numbers as users write them: mostly plain, sometimes signed, with a decimal comma, an
#: exponent, underscores, a word or nothing at all.
HOSTILE_NUMBER = st.sampled_from(["22,5", "-45", "\u221245", "1.35e2", "4_5", "1,350", "007", "nan", "inf", "-inf", "",
                                  " 45 ", "45.", ".5", "1e400", "0x2d", "\u0664\u0665", "45\u00b0", "9" * 200])
NUMBER = st.one_of(st.integers(-200, 400).map(str), st.floats(-360, 360, allow_nan=False).map(lambda v: f"{v:.2f}"),
                   HOSTILE_NUMBER)
STEM = st.text(alphabet=st.sampled_from(list("ab_- .,xy\u00e9\u2713")), min_size=1, max_size=5)
OPTION_VALUE = st.one_of(st.sampled_from(["300", "1000", "2.5", "0.5", "12"]),
                         st.sampled_from(["1", "1.0001", "2", "inf", "nan", "-3", "abc", "1e3", "0", "4_5", "", "1,5"]))


def _name(draw, angle: float) -> str:
    """A frame name whose token says ``angle`` (mostly) or something else a user might type."""
    stem = draw(STEM)
    number = draw(st.one_of(st.just(f"{angle:g}"), st.just(f"{angle:g}"), st.just(f"{angle:g}"),
                            st.just(f"{angle:03.0f}"), NUMBER))
    unit = draw(st.sampled_from(["deg"] * 6 + ["DEG", "d"]))
    extra = draw(st.sampled_from(["", "", "", "_b", f"_{angle:g}deg"]))
    return f"{stem}_{number}{unit}{extra}.png"


@st.composite
def runs(draw):
    n = draw(st.sampled_from([2, 3, 3, 4, 4, 4, 5, 5]))
    angles = draw(st.lists(st.sampled_from([0.0, 22.5, 45.0, 60.0, 90.0, 120.0, 135.0, 157.5]), min_size=n, max_size=n,
                           unique=True))
    names = [_name(draw, a) for a in angles]
    mode = draw(st.sampled_from(["names", "names", "angles", "manifest"]))
    options = {}
    for opt in ("--extinction", "--angle-offset", "--read-noise-dn"):
        if draw(st.integers(0, 3)) == 0:
            options[opt] = draw(OPTION_VALUE)
    if mode == "angles":
        options["--angles"] = draw(st.one_of(
            st.just(",".join(f"{a:g}" for a in angles)), st.just(",".join(f"{a:g}" for a in angles)),
            st.lists(NUMBER, min_size=1, max_size=6).map(",".join),
            st.sampled_from(["0:180:45", "0:180:0", "0:1e9:1", "0:1000000000:0.0001", "0,,90"])))
    manifest = None
    if mode == "manifest":
        header = draw(st.sampled_from(["file,angle_deg", "file,angle_deg", "File, Angle_deg,exposure_s",
                                       "file;angle_deg", "file,angle_deg,tilt"]))
        rows = []
        for name, a in zip(names, angles):
            cell = draw(st.one_of(st.just(f"{a:g}"), st.just(f"{a:g}"), NUMBER.map(lambda t: f'"{t}"')))
            row = f'"{name}",{cell}'
            if "exposure_s" in header and draw(st.booleans()):
                row += "," + draw(st.sampled_from(["0.01", "0.01", "1e-2", "inf", "0", "-1", '"0,5"', "4_5"]))
            if draw(st.integers(0, 9)) == 0:
                row += ",extra"
            rows.append(row)
        if draw(st.integers(0, 6)) == 0:
            rows.append("missing.png,30")
        manifest = "\n".join([header, *rows]) + "\n"
    out = draw(st.sampled_from(["out", "out", "out", "o\u00e9 t", "", "in"]))
    twice = draw(st.integers(0, 3)) == 0
    return names, angles, mode, options, manifest, out, twice


def _write_png(path: Path, frame) -> None:
    import cv2

    ok, buf = cv2.imencode(".png", np.round(np.clip(frame[0], 0, 1) * 65535).astype(np.uint16))
    assert ok
    path.write_bytes(buf.tobytes())


def _files(folder: Path) -> dict:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()} if folder.is_dir() else {}


def _check(code, err, out: Path, before: dict, inputs: dict, folder: Path):
    lines = err.strip().splitlines()
    assert "Traceback" not in err and "internal error" not in err, err
    assert code in (0, 2), err
    if code == 2:
        assert len(lines) == 1 and lines[0].startswith("error: "), err
        assert _files(out) == before  # the folder is as it was (or still absent)
    else:
        assert all(line.startswith("warning: ") for line in lines), err  # no stray library line
        marker = json.loads((out / MARKER).read_text(encoding="utf-8"))
        visible = sorted(n for n in _files(out) if not n.startswith("."))
        summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
        assert marker["outputs"] == visible == summary["outputs"]  # this run's files, and only them
        assert summary["frames"] == len(summary["analyzer_angles_deg"]) == len(summary["inputs"]) >= 3
    assert _files(folder / "in") == inputs  # inputs never change
    assert not [p.name for p in folder.iterdir() if p.name.startswith(".")]  # no staging or old folder left


@pytest.mark.filterwarnings("default::polarsky.errors.PolarskyWarning")  # shown as the command line shows them
@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture,
                                                                 HealthCheck.too_slow])
@given(case=runs())
def test_any_names_manifest_and_options_give_a_whole_result_or_one_line(case, tmp_path, capsys):
    names, angles, mode, options, manifest, out_name, twice = case
    folder = tmp_path / f"ex{next(_COUNTER)}"
    (folder / "in").mkdir(parents=True)
    frames = render_frames(SCENE, angles)
    paths = []
    for name, frame in zip(names, frames):
        p = folder / "in" / name
        _write_png(p, frame)
        paths.append(p)
    args = ["stokes"]
    if mode == "manifest":
        (folder / "in" / "manifest.csv").write_text(manifest, encoding="utf-8")
        args += ["--manifest", str(folder / "in" / "manifest.csv")]
    else:
        args += [str(p) for p in paths]
    for opt, value in options.items():
        args += [opt, value]
    out = folder / out_name if out_name else Path("")
    args += ["--out", str(out) if out_name else "", "--no-pictures"]
    inputs = _files(folder / "in")
    capsys.readouterr()
    for k in range(2 if twice else 1):
        if k == 1 and mode == "names":  # a re-run with one frame fewer into the same folder
            args.remove(str(paths[-1]))
        before = _files(out) if out_name else {}
        code = main(args)
        _check(code, capsys.readouterr().err, out if out_name else folder / "none", before, inputs, folder)
