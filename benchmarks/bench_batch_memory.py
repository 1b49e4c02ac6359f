"""Peak memory per worker for one 100-megapixel 4-frame bracket run by ``polarsky batch``.

Usage (from the repository root)::

    python benchmarks/bench_batch_memory.py [--megapixels 100] [--pictures/--no-pictures] [--keep DIR]
    python benchmarks/bench_batch_memory.py --megapixels 2       # a quick check of the script

Writes four 16-bit linear TIFF frames of an invented scene (about 200 MB each at 100 MP,
rendered row block by row block), runs the batch on a local cluster with one worker process
and samples the resident memory (RSS) of every worker process every 0.1 s.  Prints the peak
per worker (target < 3 GB) and the time taken.  Needs about 6 GB of free disk at 100 MP
(frames plus stokes.nc); everything is deleted afterwards unless --keep is given.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from polarsky.batch import runner  # noqa: E402
from polarsky.batch.config import load_settings  # noqa: E402
from polarsky.synthetic.tree import render_frames, stokes_field  # noqa: E402


def write_big_bracket(folder: Path, height: int, width: int, angles=(0, 45, 90, 135), block: int = 500):
    import tifffile

    folder.mkdir(parents=True, exist_ok=True)
    paths = [folder / f"big_{a:03d}deg.tif" for a in angles]
    frames = [np.empty((height, width), np.uint16) for _ in angles]
    for r0 in range(0, height, block):
        h = min(block, height - r0)
        s = stokes_field(h, width, seed=0)
        # a vertical gradient over the whole frame, not per block
        y = (np.arange(r0, r0 + h, dtype=np.float64) / max(height - 1, 1))[:, None]
        scale = 0.6 * (0.3 + 0.7 * y) / np.maximum(np.hypot(s[1], s[2]) / s[0], 1e-9)
        s = (s[0], s[1] * scale, s[2] * scale)
        for k, img in enumerate(render_frames(s, angles)):
            frames[k][r0:r0 + h] = np.round(np.clip(img, 0, 0.97) * 65535).astype(np.uint16)
    for p, f in zip(paths, frames):
        tifffile.imwrite(p, f)
    return paths


def _vm_hwm():
    """(pid, peak resident set size in bytes) of this process, from /proc/self/status."""
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("VmHWM:"):
                return os.getpid(), int(line.split()[1]) * 1024
    return os.getpid(), 0


def main(argv=None) -> int:
    import psutil

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--megapixels", type=float, default=100.0)
    ap.add_argument("--pictures", action=argparse.BooleanOptionalAction, default=True)
    ap.add_argument("--keep", type=Path, help="work in this folder and keep it")
    a = ap.parse_args(argv)
    width = int(round(np.sqrt(a.megapixels * 1e6 * 4 / 3)))
    height = int(round(a.megapixels * 1e6 / width))
    work = a.keep if a.keep else Path(tempfile.mkdtemp(prefix="polarsky-bench-mem-"))
    try:
        t0 = time.perf_counter()
        write_big_bracket(work / "in", height, width)
        print(f"wrote 4 frames {width}x{height} ({width * height / 1e6:.1f} MP) in {time.perf_counter() - t0:.1f} s")
        settings, _ = load_settings(overrides={"pictures": a.pictures})
        me = psutil.Process()
        peaks: dict[int, int] = {}
        stop = threading.Event()

        def sample():
            while not stop.is_set():
                for child in me.children(recursive=True):
                    try:
                        rss = child.memory_info().rss
                    except psutil.Error:
                        continue
                    peaks[child.pid] = max(peaks.get(child.pid, 0), rss)
                time.sleep(0.1)

        with runner.batch_client(workers=1, scheduler=None, scratch=work / "out" / runner.SCRATCH_DIR) as client:
            worker_pids = set(client.run(os.getpid).values())
            idle = {pid: psutil.Process(pid).memory_info().rss for pid in worker_pids}
            th = threading.Thread(target=sample, daemon=True)
            th.start()
            t1 = time.perf_counter()
            result = runner.run_batch(work / "in", work / "out", settings=settings, client=client)
            elapsed = time.perf_counter() - t1
            stop.set()
            th.join()
            hwm = client.run(_vm_hwm)  # the kernel's exact high-water mark per worker
        row = result["rows"][0]
        print(f"bracket {row['name']}: {row['status']} {row['error']} in {elapsed:.1f} s "
              f"(pictures {'on' if a.pictures else 'off'}; mean DoLP {row['mean_dolp']})")
        for pid in sorted(worker_pids):
            high = max((v for v in hwm.values() if v and v[0] == pid), default=(pid, 0))[1]
            print(f"worker {pid}: idle {idle[pid] / 2**30:.2f} GiB, peak RSS sampled {peaks.get(pid, 0) / 2**30:.2f} GiB, "
                  f"VmHWM {high / 2**30:.2f} GiB (target < 3 GB = {3e9 / 2**30:.2f} GiB)")
        print(f"driver peak RSS (this process, not a worker): {me.memory_info().rss / 2**30:.2f} GiB now")
        sizes = {p.name: p.stat().st_size for p in (work / "out" / row["name"]).iterdir()}
        print(f"outputs: {', '.join(f'{k} {v / 2**20:.0f} MiB' for k, v in sorted(sizes.items()))}")
    finally:
        if not a.keep:
            shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
