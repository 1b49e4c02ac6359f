"""Benchmark of the Stokes core and of `polarsky stokes` end to end (issue: bracket core).

Prints, in one run on this machine:

1. the estimate alone (S0, S1, S2, DoLP, AoLP from 4 float32 frames of 24 megapixels)
   beside one plain copy of the input bytes (np.copyto: the memory-bandwidth limit) and a
   plain float64 numpy implementation of the same formulas;
2. `polarsky stokes` on four 24-megapixel 16-bit TIFF files, stage by stage, beside a
   minimal script that decodes the same files, computes the five maps in float64 and saves
   them as .npy files plus two 8-bit colour-mapped PNGs;
3. the peak memory of that command against 3x the bytes of the decoded frames as float32.

Usage: python benchmarks/bench_stokes.py [--megapixels 24] [--keep]
Targets: (1) <= 2.5x the copy and >= 4x faster than the float64 baseline; (2) the command
<= 1.5x the minimal script; (3) peak memory <= 3x the decoded frames as float32.
"""

from __future__ import annotations

import argparse
import json
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

MINIMAL_SCRIPT = r'''
import sys, time, numpy as np, tifffile, cv2
from pathlib import Path
files, out = sys.argv[1:5], Path(sys.argv[5])
out.mkdir(parents=True, exist_ok=True)
i = [tifffile.imread(f).astype(np.float64) / 65535 for f in files]
s0 = (i[0] + i[1] + i[2] + i[3]) / 2
s1 = i[0] - i[2]
s2 = i[1] - i[3]
dolp = np.sqrt(s1 ** 2 + s2 ** 2) / s0
aolp = np.degrees(0.5 * np.arctan2(s2, s1)) % 180
for name, a in (("S0", s0), ("S1", s1), ("S2", s2), ("dolp", dolp), ("aolp", aolp)):
    np.save(out / f"{name}.npy", a)
cv2.imwrite(str(out / "dolp.png"), cv2.applyColorMap(np.clip(dolp * 255, 0, 255).astype(np.uint8), cv2.COLORMAP_VIRIDIS))
cv2.imwrite(str(out / "aolp.png"), cv2.applyColorMap((aolp / 180 * 255).astype(np.uint8), cv2.COLORMAP_TWILIGHT))
'''


def best(fn, repeat=3):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def shape_for(megapixels):
    w = int(round(np.sqrt(megapixels * 1e6 * 1.5)))
    h = int(round(megapixels * 1e6 / w))
    return h, w


def part1(h, w):
    from polarsky import _kernels
    from polarsky import stokes as sk

    rng = np.random.default_rng(0)
    frames = (rng.random((4, h * w), dtype=np.float32) * 0.8 + 0.1)
    dst = np.empty_like(frames)
    t_copy = best(lambda: np.copyto(dst, frames))
    del dst
    solve = sk.solve_matrix(sk.analysis_matrix([0, 45, 90, 135])).astype(np.float32)
    s = np.empty((3, h * w), np.float32)
    dolp = np.empty(h * w, np.float32)
    aolp = np.empty(h * w, np.float32)
    _kernels.stokes_maps(frames[:, :1000], solve, s[:, :1000], dolp[:1000], aolp[:1000])  # compile
    t_est = best(lambda: _kernels.stokes_maps(frames, solve, s, dolp, aolp))

    def baseline():
        i = frames.astype(np.float64)
        s0 = (i[0] + i[1] + i[2] + i[3]) / 2
        s1 = i[0] - i[2]
        s2 = i[1] - i[3]
        np.sqrt(s1 ** 2 + s2 ** 2) / s0
        np.degrees(0.5 * np.arctan2(s2, s1)) % 180

    t_base = best(baseline, repeat=2)
    print(f"1. estimate alone, 4 float32 frames of {h * w / 1e6:.1f} MP ({frames.nbytes / 1e6:.0f} MB):")
    print(f"   np.copyto of the input bytes     {t_copy * 1e3:8.1f} ms")
    print(f"   polarsky fused estimate          {t_est * 1e3:8.1f} ms  = {t_est / t_copy:.2f}x the copy (target <= 2.5x)")
    print(f"   plain float64 numpy baseline     {t_base * 1e3:8.1f} ms  -> polarsky is {t_base / t_est:.1f}x faster (target >= 4x)")
    return {"copy_s": t_copy, "estimate_s": t_est, "baseline_s": t_base}


def write_tiffs(folder, h, w):
    import tifffile

    yy, xx = np.mgrid[0:h, 0:w].astype(np.float32)
    s0 = 0.4 + 0.2 * np.sin(xx / 50) * np.cos(yy / 70)
    p = 0.1 + 0.5 * xx / w
    a = np.radians(30 + 100 * yy / h)
    paths = []
    rng = np.random.default_rng(1)
    for ang in (0, 45, 90, 135):
        t = np.radians(ang)
        i = 0.5 * s0 * (1 + p * np.cos(2 * a - 2 * t))
        i += rng.normal(0, 0.002, i.shape).astype(np.float32)
        path = folder / f"bench_{ang:03d}deg.tif"
        tifffile.imwrite(path, np.clip(i * 65535, 0, 65535).astype(np.uint16))
        paths.append(path)
    return paths


# VmHWM (peak RSS of this process image) is read from /proc: getrusage's ru_maxrss would
# include the benchmark's own memory, which a forked child inherits until exec.
_MEASURED = ("import sys; from cli.main import main; rc = main(sys.argv[1:]); "
             "hwm = [l for l in open('/proc/self/status') if l.startswith('VmHWM')][0].split()[1]; "
             "sys.stderr.write('MAXRSS %s\\n' % hwm); sys.exit(rc)")


def run_child(cmd):
    """Run ``cmd``; return (seconds, peak RSS bytes of that process or None, stdout)."""
    t = time.perf_counter()
    r = subprocess.run(cmd, capture_output=True, text=True, cwd=ROOT)
    dt = time.perf_counter() - t
    if r.returncode != 0:
        raise SystemExit(f"command failed: {' '.join(map(str, cmd))}\n{r.stderr}")
    peak = None
    for line in r.stderr.splitlines():
        if line.startswith("MAXRSS "):
            peak = int(line.split()[1]) * 1024
    return dt, peak, r.stdout


def part2and3(h, w, work):
    paths = write_tiffs(work, h, w)
    # warm the numba cache so compilation is not timed
    subprocess.run([sys.executable, "-m", "cli.main", "stokes", *map(str, paths), "--out", str(work / "warm"),
                    "--max-pixels", str(10 ** 9), "--json"], cwd=ROOT, capture_output=True)
    shutil.rmtree(work / "warm", ignore_errors=True)
    t_min, _, _ = run_child([sys.executable, "-c", MINIMAL_SCRIPT, *map(str, paths), str(work / "minimal")])
    t_cmd, peak, out = run_child([sys.executable, "-c", _MEASURED, "stokes", *map(str, paths), "--out", str(work / "out"),
                                  "--max-pixels", str(10 ** 9), "--json"])
    summary = json.loads(out)
    st = summary["timing_s"]
    print(f"2. polarsky stokes end to end on four {h * w / 1e6:.1f} MP 16-bit TIFFs:")
    for k in ("decode", "align", "estimate", "write_netcdf", "write_pictures"):
        print(f"   {k:<15} {st[k]:7.2f} s")
    print(f"   in-process total {st['total']:6.2f} s; whole command incl. start-up {t_cmd:6.2f} s")
    print(f"   minimal float64 script (decode, 5 maps, .npy, 2 PNGs) {t_min:6.2f} s")
    print(f"   ratio command / script = {t_cmd / t_min:.2f} (target <= 1.5)")
    decoded_f32 = 4 * h * w * 4
    if peak:
        print(f"3. peak memory of the command {peak / 1e6:7.0f} MB = {peak / decoded_f32:.2f}x the decoded frames as float32 "
              f"({decoded_f32 / 1e6:.0f} MB; target <= 3x)")
    return {"command_s": t_cmd, "minimal_s": t_min, "peak_bytes": peak, "stages": st}


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--megapixels", type=float, default=24.0)
    ap.add_argument("--keep", action="store_true", help="keep the work folder")
    args = ap.parse_args()
    h, w = shape_for(args.megapixels)
    part1(h, w)
    work = Path(tempfile.mkdtemp(prefix="polarsky-bench-"))
    try:
        part2and3(h, w, work)
    finally:
        if not args.keep:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
