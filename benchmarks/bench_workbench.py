"""Benchmark of ``polarsky workbench``: first view and region advice (issue: local workbench).

For the demo bracket (``polarsky demo``) and a synthetic 24-megapixel bracket (four 16-bit
TIFF frames rendered by ``polarsky.synthetic.tree``), it starts a workbench on the frames,
as ``polarsky workbench FRAMES...`` does, and prints

* processing: reading and estimating the bracket (not part of the targets);
* first view: preparing the view after processing plus, in headless Chromium, loading the
  page until every tile of the first view is drawn (target < 3 s);
* region advice: ``GET /api/advice`` round trips for boxes from 1 % of the frame to the
  whole frame, each box new (no cache), median and worst (target < 0.3 s).

Without Chromium the first view is measured by fetching the page and the first view's
tiles over HTTP.

Usage: python benchmarks/bench_workbench.py [--demo DIR] [--big DIR] [--megapixels 24] [--keep]
"""

from __future__ import annotations

import argparse
import math
import shutil
import statistics
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

FIRST_VIEW_TARGET_S = 3.0
ADVICE_TARGET_S = 0.3


def _get(wb, path):
    sep = "&" if "?" in path else "?"
    t = time.perf_counter()
    with urllib.request.urlopen(f"{wb.base}{path}{sep}token={wb.token}", timeout=60) as r:
        body = r.read()
    return time.perf_counter() - t, body


def first_view_s(wb, width=1500, height=950) -> tuple[float, str]:
    sys.path.insert(0, str(ROOT / "tools"))
    from workbench_screenshot import Page, chromium_path

    if chromium_path() is not None:
        with Page(width=width, height=height) as page:
            t = time.perf_counter()
            page.goto(wb.url)
            page.wait_for("document.body.dataset.tiles === 'complete'", timeout_s=60, interval_s=0.01)
            wall = time.perf_counter() - t
            in_page = float(page.eval("document.body.dataset.firstViewMs")) / 1000
            return wall, f"headless Chromium; {in_page:.2f} s from the page's navigation start"
    # no browser: the page, its files, the session, the entry and the tiles of a fit view
    e = wb.session.entry(wb.session.current)
    v = e.view
    t = time.perf_counter()
    for path in ("/", "/static/workbench.js", "/static/workbench.css", "/static/palette.css", "/api/session",
                 f"/api/entry?entry={e.id}"):
        _get(wb, path)
    h, w = v.shape
    level = max(0, min(v.levels, math.floor(math.log2(max(w / (width - 360), h / (height - 90))))))
    span = 256 << level
    for ty in range(math.ceil(h / span)):
        for tx in range(math.ceil(w / span)):
            _get(wb, f"/api/tile/{e.id}/{e.version}/frame/all/{level}/{tx}/{ty}.png")
    return time.perf_counter() - t, "HTTP only (no Chromium)"


def advice_times(wb, boxes, repeats=3):
    out = []
    for name, (x0, y0, x1, y1) in boxes:
        times = []
        for k in range(repeats):
            d = k  # a new box each time: no cache
            dt, _ = _get(wb, f"/api/advice?region={x0 + d},{y0},{x1},{y1}")
            times.append(dt)
        out.append((name, statistics.median(times), max(times)))
    return out


def run_case(label, frames, boxes, out_dir, **options):
    from polarsky.workbench import prepare_workbench

    t0 = time.perf_counter()
    wb, _ = prepare_workbench([str(f) for f in frames], out_dir, echo=lambda *a, **k: None, **options)
    wb.start()
    try:
        e = wb.session.entry(wb.session.current)
        build = e.view.build_s
        processing = e.load_s - build
        page_s, how = first_view_s(wb)
        adv = advice_times(wb, boxes)
        h, w = e.view.shape
        print(f"\n{label}: {w}x{h} px, {len(e.view.channels)} channel(s), {len(frames)} frames "
              f"(startup {time.perf_counter() - t0 - page_s - sum(a[1] for a in adv):.1f} s)")
        print(f"  processing (read + estimate):   {processing:6.2f} s   (not a target)")
        fv = build + page_s
        print(f"  first view after processing:    {fv:6.2f} s   target < {FIRST_VIEW_TARGET_S:g} s "
              f"[{'ok' if fv < FIRST_VIEW_TARGET_S else 'MISSED'}]  (view {build:.2f} s + page {page_s:.2f} s, {how})")
        for name, med, worst in adv:
            print(f"  region advice, {name:24s} {med:6.3f} s median, {worst:.3f} s worst   target < "
                  f"{ADVICE_TARGET_S:g} s [{'ok' if worst < ADVICE_TARGET_S else 'MISSED'}]")
    finally:
        wb.stop()


def boxes_for(w, h):
    def box(frac):
        bw, bh = int(w * math.sqrt(frac)), int(h * math.sqrt(frac))
        x0, y0 = (w - bw) // 2, (h - bh) // 2
        return (x0, y0, x0 + bw, y0 + bh)
    return [("1% of the frame", box(0.01)), ("25% of the frame", box(0.25)), ("50% of the frame", box(0.5)),
            ("the whole frame", (0, 0, w, h))]


def demo_case(demo, tmp) -> None:
    """The demo bracket (rendered into ``tmp`` unless ``demo`` names a 'polarsky demo' folder)."""
    if demo is None:
        import warnings

        from polarsky.errors import PolarskyWarning
        from polarsky.tasks.demo import run_demo

        demo = tmp / "demo"
        print("rendering the demo ...", flush=True)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", PolarskyWarning)
            run_demo(demo)
    from polarsky.synthetic.harbour import PLATE_BOX, WATER_BOX

    frames = sorted((Path(demo) / "bracket").glob("*deg.png"))
    run_case("demo bracket (kestrel, aligned)", frames,
             [("demo water box", WATER_BOX), ("demo plate box", PLATE_BOX)], tmp / "saves", align=True)


def big_case(big, megapixels, tmp) -> None:
    """A synthetic bracket of ``megapixels`` (rendered into ``big`` or ``tmp`` unless there)."""
    import tifffile

    big = Path(big) if big else tmp / "big"
    frames = sorted(big.glob("*deg.tif"))
    if not frames:
        from polarsky.synthetic.tree import write_bracket

        h = int(round(math.sqrt(megapixels * 1e6 / 1.5)))
        w = int(round(h * 1.5))
        print(f"\nrendering a {w}x{h} bracket into {big} ...", flush=True)
        frames = write_bracket(big, "big", height=h, width=w, seed=3)
    h, w = tifffile.TiffFile(frames[0]).pages[0].shape[:2]
    run_case(f"synthetic {w * h / 1e6:.0f} MP bracket", frames, boxes_for(w, h), tmp / "saves")


def main(argv=None) -> int:
    import os

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--demo", help="an existing 'polarsky demo --out' folder (default: make one)")
    ap.add_argument("--big", help="a folder with an existing large bracket <stem>_<angle>deg.tif (default: make one)")
    ap.add_argument("--megapixels", type=float, default=24.0)
    ap.add_argument("--keep", action="store_true", help="keep the rendered files")
    a = ap.parse_args(argv)
    print(f"machine: {os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f} (other work slows every number)")
    tmp = Path(tempfile.mkdtemp(prefix="bench-workbench-"))
    try:
        demo_case(a.demo, tmp)
        big_case(a.big, a.megapixels, tmp)
    finally:
        if not a.keep:
            shutil.rmtree(tmp, ignore_errors=True)
    if a.keep:
        print(f"\nfiles kept in {tmp}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
