"""Speed of one 2448x2048 polarization-mosaic frame through the command's own path, per method.

Times, for each demosaicing method:

(a) the fused compiled pass alone (decode + S, mean, residual: ``polarsky.mosaic.fast.fast_fit``);
(b) every Stokes product of the frame through the row-block runner, as ``polarsky stokes`` runs it
    (``tasks._common.open_source`` + ``estimate.runner.run_blocks``, products kept in memory);
(c) ``polarsky stokes FRAME --mosaic CELL --demosaic METHOD --no-pictures --out DIR`` in-process
    (``tasks.stokes.run_stokes``: read the PNG, estimate, write stokes.nc and summary.json);
(d) the same command as a new process (``python -m polarsky``), start-up included;

beside the floors it cannot beat: one copy of the frame's bytes, and reading the PNG plus writing
the same number of output bytes with plain numpy.

Run from the repository root:  python benchmarks/bench_mosaic.py [--repeat 5] [--write]
A quick check of the script on a smaller frame:  python benchmarks/bench_mosaic.py --size 640x480 --repeat 1
Times are the best of --repeat runs (the machine may be shared); medians are shown too.
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

W_PX, H_PX = 2448, 2048
CELL = "90,45;135,0"


def best(f, repeat):
    """(best, median) wall time of ``f`` after one warm-up run."""
    f()
    t = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        f()
        t.append(time.perf_counter() - t0)
    return min(t), float(np.median(t))


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--size", default=f"{W_PX}x{H_PX}", help=f"frame size WIDTHxHEIGHT, even (default {W_PX}x{H_PX})")
    ap.add_argument("--write", action="store_true", help="put the printed lines into docs/mosaic.md")
    args = ap.parse_args(argv)
    try:
        width, height = (int(v) for v in args.size.lower().split("x"))
    except ValueError:
        ap.error(f"--size {args.size!r} is not WIDTHxHEIGHT, e.g. 640x480")
    if width < 8 or height < 8 or width % 2 or height % 2:
        ap.error(f"--size {args.size}: give even sides of at least 8 pixels (the mosaic cell is 2x2)")
    if args.write and (width, height) != (W_PX, H_PX):
        ap.error(f"--write records the {W_PX}x{H_PX} figures in docs/mosaic.md; drop --size or --write")

    import cv2

    from polarsky.estimate.runner import run_blocks, use_compiled_mosaic
    from polarsky.estimate.sinks import MemorySink
    from polarsky.mosaic.decode import position_matrix
    from polarsky.mosaic.fast import fast_fit
    from polarsky.mosaic.layout import parse_mosaic
    from polarsky.options.settings import Settings
    from polarsky.registries import DEMOSAIC_METHODS
    from polarsky.synthetic.mosaic import mosaic_sample, scene_edges, write_mosaic_png
    from polarsky.tasks._common import open_source
    from polarsky.tasks.stokes import run_stokes

    layout = parse_mosaic(CELL)
    rng = np.random.default_rng(0)
    raw = np.clip(mosaic_sample(scene_edges(height, width), layout) + rng.normal(0, 0.002, (height, width)), 0, 1)
    tmp = Path(tempfile.mkdtemp(prefix="bench-mosaic-"))
    frame = tmp / "frame.png"
    write_mosaic_png(frame, raw.astype(np.float32), bits=16, full=4095)
    values = (np.round(raw * 4095) / 4095).astype(np.float32)
    w = position_matrix(layout)
    lines = []

    def say(text):
        lines.append(text)
        print(text, flush=True)

    say(f"mosaic frame {width}x{height}, 12-bit data in a 16-bit PNG ({frame.stat().st_size / 1e6:.1f} MB); "
        f"{os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.2f}")
    counts = np.round(raw * 4095).astype(np.uint16)
    t_copy, _ = best(lambda: counts.copy(), args.repeat)
    say(f"floor: one copy of the frame's bytes {t_copy * 1e3:.1f} ms")
    say(f"{'method':<11} {'fused pass':>12} {'all products':>14} {'command':>10} {'new process':>12} {'I/O floor':>10}")
    for name in DEMOSAIC_METHODS:
        k = DEMOSAIC_METHODS[name].scale
        n_out = (height // k) * (width // k)
        t_fast, _ = best(lambda: fast_fit(values, w, name), args.repeat)
        settings = Settings.from_options({"mosaic": CELL, "demosaic": name, "bit_depth": 12, "pictures": False})

        def products():
            op = open_source([frame], settings)
            names = ("S0", "S1", "S2", "dolp", "dolp_unbiased", "aolp", "sigma_dolp", "sigma_aolp", "residual",
                     "valid")
            run_blocks(op.source, op.noise, [MemorySink(op.source.shape, 1, names)])

        t_all, _ = best(products, args.repeat)
        out = tmp / f"out-{name}"
        t_cmd, m_cmd = best(lambda: run_stokes([frame], out, settings), args.repeat)
        cmd = [sys.executable, "-m", "polarsky", "stokes", str(frame), "--mosaic", CELL, "--demosaic", name,
               "--bit-depth", "12", "--no-pictures", "--out", str(tmp / f"proc-{name}")]
        t_proc, _ = best(lambda: subprocess.run(cmd, check=True, capture_output=True), max(1, args.repeat // 2))
        nbytes = n_out * 4 * 9 + n_out

        def floor():  # read the PNG, write as many bytes as the products with plain numpy
            a = cv2.imread(str(frame), cv2.IMREAD_UNCHANGED).astype(np.float32)
            np.zeros(nbytes // 4, np.float32).tofile(tmp / "floor.bin")
            return a

        t_floor, _ = best(floor, args.repeat)
        say(f"{name:<11} {t_fast * 1e3:9.0f} ms {t_all * 1e3:11.0f} ms {t_cmd * 1e3:7.0f} ms {t_proc * 1e3:9.0f} ms "
            f"{t_floor * 1e3:7.0f} ms   ({1 / t_cmd:.1f} frames/s in-process, median {m_cmd * 1e3:.0f} ms)")
    if use_compiled_mosaic(width * height):
        say("the command runs the compiled fused pass of each method (mono sensor, no per-pixel calibration)")
    else:
        say("below the compiled kernels' size the command runs the numpy path (the fused pass is timed alone)")
    shutil.rmtree(tmp, ignore_errors=True)
    if args.write:
        path = ROOT / "docs" / "mosaic.md"
        text = path.read_text(encoding="utf-8")
        block = "```\n" + "\n".join(lines) + "\n```\n"
        text = re.sub(r"(<!-- speed-table:start -->\n).*?(<!-- speed-table:end -->)",
                      lambda m: m.group(1) + block + m.group(2), text, flags=re.S)
        path.write_text(text, encoding="utf-8")


if __name__ == "__main__":
    main()
