"""Speed of mosaic decoding plus Stokes on a 2448x2048 mono frame, per method.

Prints frames per second of (a) decoding + S0, S1, S2 (the issue's figure; targets: superpixel
and bilinear >= 20 fps, the higher-order method >= 2 fps on the 2-core reference machine),
(b) the same plus DoLP and AoLP (the core's fused kernel, polarsky._kernels.stokes_maps), and (c) the full per-pixel
products of the Dataset path (channels + polarsky.pipeline.estimate_block: uncertainties,
debiased DoLP, residual), beside the time of one plain copy of the frame's bytes.

Run from the repository root:  python benchmarks/bench_mosaic.py [--repeat 7]
Times are the best of --repeat runs (the machine may be shared); the median is shown too.
"""

from __future__ import annotations

import argparse
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))

from polarsky.mosaic.decode import decode_mosaic, fast_stokes, fast_stokes_maps, position_matrix  # noqa: E402
from polarsky.mosaic.layout import parse_mosaic  # noqa: E402
from polarsky.mosaic.methods import DEMOSAIC_METHODS  # noqa: E402
from polarsky.mosaic.synthetic import mosaic_sample, scene_edges  # noqa: E402
from polarsky.pipeline import estimate_block  # noqa: E402

W_PX, H_PX = 2448, 2048


def best(f, repeat):
    """Best and median wall time, and the CPU time (all threads) of the best run."""
    f()  # warm-up
    t, c = [], []
    for _ in range(repeat):
        c0, t0 = time.process_time(), time.perf_counter()
        f()
        t.append(time.perf_counter() - t0)
        c.append(time.process_time() - c0)
    i = int(np.argmin(t))
    best.cpu = c[i]
    return t[i], float(np.median(t))


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--full", action="store_true", help="also time the full Dataset products (slow)")
    ap.add_argument("--write", action="store_true", help="put the printed lines into docs/mosaic.md")
    args = ap.parse_args(argv)
    layout = parse_mosaic("90,45;135,0")
    rng = np.random.default_rng(0)
    raw = mosaic_sample(scene_edges(H_PX, W_PX), layout)
    counts = np.clip(np.round((raw + rng.normal(0, 0.002, raw.shape)) * 4095), 0, 4095).astype(np.uint16)
    values = counts.astype(np.float32) / np.float32(4095)
    w = position_matrix(layout)
    lines = []

    def say(text):  # print and keep the line for --write
        lines.append(text)
        print(text)

    say(f"mosaic frame {W_PX}x{H_PX}, 12-bit data in uint16 ({counts.nbytes / 1e6:.1f} MB), "
          f"float32 linear values; {os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.2f}")
    tc, tcm = best(lambda: counts.copy(), args.repeat)
    say(f"plain copy of the frame's bytes: {tc * 1e3:.2f} ms (median {tcm * 1e3:.2f})")
    say(f"{'method':<11} {'decode+S0,S1,S2 (wall, cpu of all threads)':>44} {'+ DoLP, AoLP':>22}" + (f" {'Dataset products':>22}" if args.full else ""))
    for name in DEMOSAIC_METHODS:
        t1, m1 = best(lambda: fast_stokes(values, w, name), args.repeat)
        c1 = best.cpu

        t2, m2 = best(lambda: fast_stokes_maps(values, w, name), args.repeat)
        line = (f"{name:<11} {1 / t1:7.1f} fps ({t1 * 1e3:6.1f} ms, cpu {c1 * 1e3:6.1f} ms) "
                f"{1 / t2:7.1f} fps ({t2 * 1e3:6.1f} ms)")
        if args.full:
            def full():
                dec = decode_mosaic(values, None, layout, name)
                estimate_block(dec["intensities"], dec["valid"], dec["w"], full_scale=4095.0)

            t3, _ = best(full, max(2, args.repeat // 3))
            line += f" {1 / t3:7.2f} fps ({t3 * 1e3:6.0f} ms)"
        say(line)
    say("targets: superpixel and bilinear >= 20 fps, newton >= 2 fps (decode + S0, S1, S2)")
    if args.write:
        import re

        path = os.path.join(os.path.dirname(__file__), "..", "docs", "mosaic.md")
        text = open(path, encoding="utf-8").read()
        block = "```\n" + "\n".join(lines) + "\n```\n"
        text = re.sub(r"(<!-- speed-table:start -->\n).*?(<!-- speed-table:end -->)",
                      lambda m: m.group(1) + block + m.group(2), text, flags=re.S)
        with open(path, "w", encoding="utf-8") as f:
            f.write(text)


if __name__ == "__main__":
    main()
