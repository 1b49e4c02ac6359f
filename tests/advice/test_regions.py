"""Region sums (polarsky/advice/regions.py): the same floats whichever way the blocks arrive.

``polarsky advise`` adds the sums block by block as the row-block runner produces them; the
workbench adds them over products it holds in memory.  Both must give the same floats to the
last bit (the advice JSON is compared byte for byte), and the column-wise fast path must keep
the floats of the plain selection.  These are checks of our own code against itself.
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.synth import render_frames, smooth_scene, write_pngs


@pytest.fixture(scope="module")
def bracket(tmp_path_factory):
    """A 16-bit bracket of an invented scene with a spot saturated in every frame."""
    s = smooth_scene(90, 140)
    s[0, :, 10:14, 20:25] = 4.0
    angles = [0, 45, 90, 135]
    return write_pngs(tmp_path_factory.mktemp("regions"), render_frames(s, angles), angles, bits=16), None


def test_region_sums_are_what_the_advise_runner_adds_bit_for_bit(bracket):
    """The sums the workbench adds over products in memory are those RegionSink gets from the
    row-block runner (as 'polarsky advise' runs it), to the last bit, for several block sizes."""
    from polarsky.advice.regions import RegionSink, region_sums_in_blocks
    from polarsky.estimate.runner import block_rows, run_blocks
    from polarsky.estimate.sinks import MemorySink
    from polarsky.options.settings import Settings
    from polarsky.tasks._common import open_source

    frames, _ = bracket
    op = open_source([str(f) for f in frames], Settings())
    h, w = op.source.shape
    masks = {"region": np.zeros((h, w), bool), "protect": np.zeros((h, w), bool)}
    masks["region"][7:80, 3:131] = True
    masks["protect"][40:41, 60:62] = True
    for rows in (1, 7, block_rows((h, w), 1)):
        sink = RegionSink(masks)
        mem = MemorySink((h, w), 1, ("S0", "S1", "S2", "valid"))
        run_blocks(op.source, op.noise, [sink, mem], rows=rows)
        sums, counts = region_sums_in_blocks(mem.arrays, masks, rows)
        for k in masks:
            assert counts[k] == sink.counts[k]
            assert sums[k].tobytes() == sink.sums[k].tobytes()  # identical floats, not just close


def test_region_sums_keep_the_plain_selection_bit_for_bit():
    """Summing a region's columns on numpy's fast boolean path gives the floats of the plain
    selection ``a[:, mask & valid]`` of a whole block, summed in float64."""
    from polarsky.advice.regions import region_sums_in_blocks

    rng = np.random.default_rng(4)
    for c, h, w, box in [(1, 700, 1900, (3, 17, 1801, 690)), (3, 400, 1500, (0, 0, 1500, 400)),
                         (3, 333, 2100, (100, 1, 101, 2)), (1, 50, 60, (0, 0, 60, 50))]:
        arrays = {k: rng.normal(0.3, 0.2, (c, h, w)).astype(np.float32) for k in ("S0", "S1", "S2")}
        arrays["valid"] = rng.random((c, h, w)) > 0.05
        mask = np.zeros((h, w), bool)
        mask[box[1]:box[3], box[0]:box[2]] = True
        rows = 97
        ref, n = np.zeros(3), 0
        for r0 in range(0, h, rows):
            sel = mask[r0:r0 + rows] & arrays["valid"][:, r0:r0 + rows].all(axis=0)
            if sel.any():
                ref += [float(np.sum(arrays[k][:, r0:r0 + rows][:, sel], dtype=np.float64)) for k in ("S0", "S1", "S2")]
                n += int(sel.sum())
        sums, counts = region_sums_in_blocks(arrays, {"region": mask}, rows)
        assert counts["region"] == n
        assert sums["region"].tobytes() == ref.tobytes()
