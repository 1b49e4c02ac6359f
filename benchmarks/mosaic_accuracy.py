"""Accuracy of the mosaic decoding methods on synthetic scenes with known Stokes maps.

Each scene (edges, fine texture, smooth gradients, uniform) is rendered at full sensor
resolution, sampled through the mosaic ``90,45;135,0`` (each pixel sees only its own
micro-polarizer), decoded by every registered method as the ``stokes`` command does (the
mosaic source through the row-block runner) and compared with the truth:
RMS error of DoLP over all pixels at least 4 (colour: 8) sensor pixels from the border, and RMS error of
AoLP over those of them where the true DoLP is at least 0.1 (AoLP is undefined as DoLP -> 0).
``superpixel`` is scored against the truth averaged over each 2x2 cell (its output grid).
No noise is added: the figures are the interpolation (IFOV) errors alone.  Colour rows: the
same scene in R, G and B (scaled 0.5, 1, 0.8) on an RGGB sensor, errors over all three channels.

Run from the repository root:  python benchmarks/mosaic_accuracy.py [--size 512] [--write]
``--write`` replaces the table in docs/mosaic.md.
"""

from __future__ import annotations

import argparse
import os
import re
import sys

import numpy as np

ROOT = os.path.join(os.path.dirname(__file__), "..")
sys.path.insert(0, ROOT)

from polarsky.core.noise import NoiseModel  # noqa: E402
from polarsky.core.stokes import dolp_aolp  # noqa: E402
from polarsky.estimate.runner import run_blocks  # noqa: E402
from polarsky.estimate.sinks import MemorySink  # noqa: E402
from polarsky.estimate.sources import MosaicSource  # noqa: E402
from polarsky.mosaic.layout import parse_mosaic  # noqa: E402
from polarsky.registries import DEMOSAIC_METHODS  # noqa: E402
from polarsky.synthetic.mosaic import SCENES, mosaic_sample  # noqa: E402

LAYOUT = "90,45;135,0"


def decode(raw, layout, method):
    """DoLP and AoLP (deg), (C, H', W'), of linear mosaic values ``raw`` (H, W) as the ``stokes``
    command estimates them (:class:`polarsky.estimate.sources.MosaicSource` through the row-block
    runner, the compiled or numpy path chosen by the frame's size as the command chooses it)."""
    src = MosaicSource(raw, None, layout, DEMOSAIC_METHODS[method])
    sink = MemorySink(src.shape, len(src.channels), ("dolp", "aolp"))
    run_blocks(src, NoiseModel(), [sink])
    return sink.arrays["dolp"].astype(np.float64), sink.arrays["aolp"].astype(np.float64)


def errors(scene, method, layout=LAYOUT):
    """(rms_dolp, rms_aolp_deg) of ``method`` on a (3, H, W) scene."""
    lay = parse_mosaic(layout)
    h, w = scene.shape[-2:]
    raw = mosaic_sample(scene, lay)
    d, a = (x[0] for x in decode(raw, lay, method))
    k = DEMOSAIC_METHODS[method].scale
    truth = scene if k == 1 else scene.reshape(3, h // 2, 2, w // 2, 2).mean(axis=(2, 4))
    dt, at = dolp_aolp(truth)
    b = 4 // k
    sl = (slice(b, -b), slice(b, -b))
    da = ((a - at + 90) % 180 - 90)[sl]
    pol = dt[sl] >= 0.1
    return float(np.sqrt(np.mean((d - dt)[sl] ** 2))), float(np.sqrt(np.mean(da[pol] ** 2))) if pol.any() else float("nan")


def colour_errors(scene, method, order="RGGB", factors=(0.5, 1.0, 0.8)):
    """(rms_dolp, rms_aolp_deg) over R, G, B of a colour sensor (each colour a scaled copy)."""
    lay = parse_mosaic(LAYOUT, order)
    h, w = scene.shape[-2:]
    raw = mosaic_sample(np.stack([scene * f for f in factors]), lay)
    d, a = decode(raw, lay, method)
    k = DEMOSAIC_METHODS[method].scale
    truth = scene if k == 1 else scene.reshape(3, h // 2, 2, w // 2, 2).mean(axis=(2, 4))
    dt, at = dolp_aolp(truth)
    b = 8 // k
    sl = (slice(None), slice(b, -b), slice(b, -b))
    da = ((a - at[None] + 90) % 180 - 90)[sl]
    pol = np.broadcast_to(dt[None] >= 0.1, d.shape)[sl]
    return float(np.sqrt(np.mean((d - dt[None])[sl] ** 2))), float(np.sqrt(np.mean(da[pol] ** 2)))


def table(size=512) -> str:
    lines = ["| sensor | scene | method | RMS DoLP error | RMS AoLP error (deg) |", "| --- | --- | --- | --- | --- |"]
    for name, make in SCENES.items():
        scene = make(size, size)
        for method in DEMOSAIC_METHODS:
            ed, ea = errors(scene, method)
            lines.append(f"| mono | {name} | {method} | {ed:.5f} | {ea:.3f} |")
    for name in ("edges", "texture", "gradient"):
        scene = SCENES[name](size, size)
        for method in DEMOSAIC_METHODS:
            ed, ea = colour_errors(scene, method)
            lines.append(f"| colour RGGB | {name} | {method} | {ed:.5f} | {ea:.3f} |")
    return "\n".join(lines)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=512)
    ap.add_argument("--write", action="store_true", help="update the table in docs/mosaic.md")
    args = ap.parse_args(argv)
    t = table(args.size)
    print(f"scenes {args.size}x{args.size}, mosaic {LAYOUT}, no noise")
    print(t)
    if args.write:
        path = os.path.join(ROOT, "docs", "mosaic.md")
        text = open(path, encoding="utf-8").read()
        new = re.sub(r"(<!-- accuracy-table:start -->\n).*?(<!-- accuracy-table:end -->)",
                     lambda m: m.group(1) + f"Scenes {args.size}x{args.size} px, mosaic `{LAYOUT}`, no noise "
                     f"(`python benchmarks/mosaic_accuracy.py --size {args.size} --write`).\n\n" + t + "\n"
                     + m.group(2), text, flags=re.S)
        with open(path, "w", encoding="utf-8") as f:
            f.write(new)
        print(f"updated {path}")


if __name__ == "__main__":
    main()
