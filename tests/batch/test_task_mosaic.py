"""Polarization-mosaic frames in a batch (runs only where mosaic support is installed).

Each raw frame is its own bracket; the per-bracket task runs in-process here (the cluster
path is covered by test_batch_run.py).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from polarsky.batch import runner
from polarsky.batch.config import merge_settings
from polarsky.errors import InputError

if runner.mosaic_function() is None:
    pytest.skip("polarsky.mosaic is not part of this installation", allow_module_level=True)

LAY = "90,45;135,0"


@pytest.fixture(scope="module")
def mosaic_root(tmp_path_factory):
    from polarsky.mosaic.synthetic import mosaic_sample, scene_uniform, write_mosaic_png

    root = tmp_path_factory.mktemp("mosaic") / "in"
    root.mkdir()
    for k, dolp in enumerate((0.2, 0.35)):
        raw = mosaic_sample(scene_uniform(48, 64, s0=0.7, dolp=dolp, aolp_deg=120.0), LAY, dtype=np.float64)
        write_mosaic_png(root / f"cam_{k:04d}.png", raw, full=4095)
    (root / "cam_0002.png").write_bytes(b"\x89PNG broken")
    return root


def test_every_mosaic_frame_is_a_bracket(mosaic_root, tmp_path):
    settings = merge_settings({"mosaic": {"cell": LAY, "demosaic": "superpixel", "bit_depth": 12},
                               "stokes": {"pictures": False}})
    runner.check_steps(settings)
    brackets = runner.list_brackets(mosaic_root, settings=settings)
    assert [(b.rule, len(b.frames)) for b in brackets] == [("mosaic", 1)] * 3
    out = tmp_path / "out"
    out.mkdir()
    rows = [runner.process_bracket({"bracket": b, "out_dir": str(out), "settings": settings, "run_id": "t"})
            for b in brackets]
    assert [r["status"] for r in rows] == ["done", "done", "failed"]
    assert "cam_0002.png" in rows[2]["error"]
    for r, dolp in zip(rows, (0.2, 0.35)):
        summary = json.loads((out / r["name"] / "summary.json").read_text())
        assert summary["mosaic"] == LAY and summary["demosaic"] == "superpixel"
        assert r["angles_deg"] == ";".join(f"{a:g}" for a in summary["analyzer_angles_deg"])
        # uniform invented scene of known DoLP (our own render)
        assert r["mean_dolp"] == pytest.approx(dolp, abs=2e-3)


@pytest.mark.parametrize("extra,match", [
    ({"mosaic": {"cell": LAY, "demosaic": "nope"}}, "demosaic 'nope' is not one of"),
    ({"mosaic": {"cell": LAY}, "advise": {"region": [0, 0, 4, 4]}}, "not available for mosaic frames"),
    ({"mosaic": {"cell": LAY}, "discovery": {"angles_deg": [0, 45, 90]}}, "does not apply to mosaic"),
    ({"mosaic": {"cell": "1,2"}}, "."),
])
def test_mosaic_settings_checked_before_running(extra, match):
    with pytest.raises(InputError, match=match):
        runner.check_steps(merge_settings(extra))
