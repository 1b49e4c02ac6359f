"""Polarization-mosaic frames in a batch: each raw frame is its own bracket.

The per-bracket task runs in-process here (the cluster path is covered by test_runner.py).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from polarsky.batch import runner
from polarsky.batch.task import process_bracket
from polarsky.errors import InputError
from polarsky.options.settings import Settings
from polarsky.options.syntax import format_angle_list

LAY = "90,45;135,0"


@pytest.fixture(scope="module")
def mosaic_root(tmp_path_factory):
    from polarsky.synthetic.mosaic import mosaic_sample, scene_uniform, write_mosaic_png

    root = tmp_path_factory.mktemp("mosaic") / "in"
    root.mkdir()
    for k, dolp in enumerate((0.2, 0.35)):
        raw = mosaic_sample(scene_uniform(48, 64, s0=0.7, dolp=dolp, aolp_deg=120.0), LAY, dtype=np.float64)
        write_mosaic_png(root / f"cam_{k:04d}.png", raw, full=4095)
    (root / "cam_0002.png").write_bytes(b"\x89PNG broken")
    return root


def test_every_mosaic_frame_is_a_bracket(mosaic_root, tmp_path):
    settings = Settings.from_options({"mosaic": LAY, "demosaic": "superpixel", "bit_depth": 12, "pictures": False})
    runner.check_batch_settings(settings, sky=False)
    brackets = runner.list_brackets(mosaic_root, settings=settings)
    assert [(b.rule, len(b.frames)) for b in brackets] == [("mosaic", 1)] * 3
    out = tmp_path / "out"
    out.mkdir()
    rows = [process_bracket({"bracket": b, "out_dir": str(out), "settings": settings, "sky": False, "run_id": "t"})
            for b in brackets]
    assert [r["status"] for r in rows] == ["done", "done", "failed"]
    assert "cam_0002.png" in rows[2]["error"]
    for r, dolp in zip(rows, (0.2, 0.35)):
        summary = json.loads((out / r["name"] / "summary.json").read_text())
        assert summary["mosaic"] == LAY and summary["demosaic"] == "superpixel"
        assert r["analyzer_angles_deg"] == format_angle_list(summary["analyzer_angles_deg"]) == "90,45,135,0"
        # uniform invented scene of known DoLP (our own render)
        assert r["mean_dolp"] == pytest.approx(dolp, abs=2e-3)


@pytest.mark.parametrize("options, match", [
    ({"mosaic": LAY, "demosaic": "nope"}, "--demosaic 'nope' is not a known demosaic method"),
    ({"mosaic": LAY, "region": [0, 0, 4, 4]}, "not available for mosaic frames"),
    ({"mosaic": LAY, "angles": [0, 45, 90]}, "--angles describes a bracket of frames and cannot be used with --mosaic"),
    ({"mosaic": "1,2"}, "not a 2x2 cell"),
])
def test_mosaic_settings_checked_before_running(options, match):
    with pytest.raises(InputError, match=match):
        runner.check_batch_settings(Settings.from_options(options), sky=False)
