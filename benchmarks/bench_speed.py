"""Speed as users feel it: every target of the speed work, measured on the command's own path.

Usage (from the repository root)::

    python benchmarks/bench_speed.py                 # every target (about 5 to 10 minutes)
    python benchmarks/bench_speed.py --only 1,5,6    # some of them
    python benchmarks/bench_speed.py --megapixels 6  # a smaller "large" bracket

Each figure is printed beside its target and the floor it cannot beat, measured in the same
run on this machine (the load average is printed with it: on a shared machine, figures
vary).  Times are wall-clock seconds of whole processes unless said otherwise; "CPU" is
user + system time of the process.

1. Latency of one small bracket (four 640x480 16-bit PNG frames, pictures on, new process,
   numba cache warm): ``polarsky advise --out`` within 2x, ``polarsky stokes`` within 4x the
   start-up of ``python -c "import numpy, PIL.Image"``.
2. Large bracket end to end (four 24 MP 16-bit TIFFs of a synthetic natural-looking scene):
   ``polarsky stokes`` within 2x an I/O floor measured in the same run (decode the frames
   with OpenCV; write as many bytes as the command's outputs as plain files), stage by stage.
3. Peak memory of that command at most 2.5x the decoded frames as float32.
4. Mosaic sequences and 7. batch throughput: ``benchmarks/bench_batch.py`` (run by this
   script with ``--only 4`` / ``--only 7``, or on its own).
5. Storage: ``stokes.nc`` at most 0.4 of the nine uncompressed float32 maps, on the demo and
   on the 24 MP scene (with the precision documented in polarsky/write/quantize.py).
6. Pictures: one map picture from its preview at most 0.15 s (warm picture cache).
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

# Peak resident memory of the process itself (VmHWM), read just before it exits.
_MEASURED = ("import sys; from polarsky.cli.main import main; rc = main(sys.argv[1:]); "
             "hwm = [l for l in open('/proc/self/status') if l.startswith('VmHWM')][0].split()[1]; "
             "sys.stderr.write('VMHWM %s\\n' % hwm); sys.exit(rc)")


def load() -> str:
    return f"load {os.getloadavg()[0]:.2f} on {os.cpu_count()} CPUs"


#: Children run as a user's installation does: with compiled bytecode (.pyc) written and used.
CHILD_ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}


def run(cmd, **kw):
    """Run ``cmd``; return (wall s, CPU s of the child, completed process)."""
    kw.setdefault("env", CHILD_ENV)
    before = os.times()
    t = time.perf_counter()
    r = subprocess.run(cmd, capture_output=True, text=True, **kw)
    wall = time.perf_counter() - t
    after = os.times()
    cpu = (after.children_user - before.children_user) + (after.children_system - before.children_system)
    if r.returncode != 0:
        raise SystemExit(f"failed: {' '.join(map(str, cmd))}\n{r.stderr}")
    return wall, cpu, r


def best_of(n, fn):
    """Smallest (wall, cpu) of ``n`` runs of ``fn() -> (wall, cpu, ...)``."""
    runs = [fn()[:2] for _ in range(n)]
    return min(r[0] for r in runs), min(r[1] for r in runs)


def row(label, value, unit, target_text, ok):
    mark = "ok" if ok else "MISSED"
    print(f"   {label:<52} {value:>9.3f} {unit:<3} {target_text:<34} {mark}", flush=True)


# ---------------------------------------------------------------------------- 1. small bracket
def small_bracket(folder: Path, h=480, w=640) -> list[Path]:
    from tests.synth import render_frames, smooth_scene, write_pngs

    angles = [0, 45, 90, 135]
    frames = render_frames(smooth_scene(h, w, channels=3), angles, noise=0.003)
    return write_pngs(folder, frames, angles, bits=16)


def target1(work: Path, repeat: int):
    print(f"1. one small bracket: four 640x480 16-bit RGB PNGs, new process each time ({load()})")
    frames = [str(p) for p in small_bracket(work / "small")]
    py = sys.executable
    base = best_of(repeat, lambda: run([py, "-c", "import numpy, PIL.Image"]))
    region = ["--region", "40,40,400,300"]
    run([py, "-m", "polarsky", "advise", *frames, *region, "--out", str(work / "warm-a")])  # caches warm
    run([py, "-m", "polarsky", "stokes", *frames, "--out", str(work / "warm-s")])

    def advise_out():
        shutil.rmtree(work / "a", ignore_errors=True)
        return run([py, "-m", "polarsky", "advise", *frames, *region, "--out", str(work / "a")])

    def advise_plain():
        return run([py, "-m", "polarsky", "advise", *frames, *region])

    def stokes():
        shutil.rmtree(work / "s", ignore_errors=True)
        return run([py, "-m", "polarsky", "stokes", *frames, "--out", str(work / "s")])

    adv_out, adv, sto = best_of(repeat, advise_out), best_of(repeat, advise_plain), best_of(repeat, stokes)
    print(f"   {'':<52} {'wall':>9}     {'target':<34}")
    row('python -c "import numpy, PIL.Image" (the floor)', base[0], "s", f"(CPU {base[1]:.3f} s)", True)
    row("polarsky advise --out (pictures on)", adv_out[0], "s", f"<= 2x floor = {2 * base[0]:.3f} s "
        f"({adv_out[0] / base[0]:.2f}x)", adv_out[0] <= 2 * base[0])
    row("polarsky advise (no pictures)", adv[0], "s", f"<= 2x floor = {2 * base[0]:.3f} s ({adv[0] / base[0]:.2f}x)",
        adv[0] <= 2 * base[0])
    row("polarsky stokes (4 pictures)", sto[0], "s", f"<= 4x floor = {4 * base[0]:.3f} s ({sto[0] / base[0]:.2f}x)",
        sto[0] <= 4 * base[0])
    print(f"   CPU: floor {base[1]:.3f} s, advise --out {adv_out[1]:.3f} s ({adv_out[1] / base[1]:.2f}x), advise "
          f"{adv[1]:.3f} s ({adv[1] / base[1]:.2f}x), stokes {sto[1]:.3f} s ({sto[1] / base[1]:.2f}x)")
    summary = json.loads((work / "s" / "summary.json").read_text())
    print("   stokes stages (in-process, s): " + ", ".join(f"{k} {v:.3f}" for k, v in summary["timing_s"].items()
                                                        if v is not None))
    return {"floor_s": base[0], "advise_out_s": adv_out[0], "advise_s": adv[0], "stokes_s": sto[0]}


# ---------------------------------------------------------------------------- 2., 3. large bracket
def shape_for(megapixels: float):
    w = int(round(np.sqrt(megapixels * 1e6 * 1.5)))
    return int(round(megapixels * 1e6 / w)), w


def natural_scene(h: int, w: int, seed: int = 3):
    """True Stokes maps (3, h, w) float32 of a synthetic scene with natural-image statistics.

    The demo's invented harbour scene (polarized sky, Fresnel glare on rippled water, a
    textured wall), enlarged to ``h`` x ``w``, its intensity modulated by a 1/f ("pink")
    texture, as natural images' spectra fall (Field 1987, J. Opt. Soc. Am. A 4, 2379).
    """
    import cv2

    from polarsky.synthetic.harbour import render_scene

    s_small = render_scene().stokes[:, 1].astype(np.float32)  # green channel, (3, 320, 480)
    s = np.stack([cv2.resize(c, (w, h), interpolation=cv2.INTER_CUBIC) for c in s_small])
    rng = np.random.default_rng(seed)
    tex = np.zeros((h, w), np.float32)
    for octave in range(1, 8):  # sum of octaves with amplitude ~ 1/f: a pink texture
        gh, gw = max(2, h >> (9 - octave)), max(2, w >> (9 - octave))
        layer = rng.standard_normal((gh, gw)).astype(np.float32)
        tex += cv2.resize(layer, (w, h), interpolation=cv2.INTER_CUBIC) * np.float32(0.5 ** (7 - octave) * 0.04)
    s *= np.clip(1.0 + tex, 0.2, None)[None]
    return s


def write_large_bracket(folder: Path, megapixels: float) -> list[Path]:
    """Four 16-bit TIFFs through an ideal filter at 0/45/90/135 deg with camera noise
    (shot noise of a 20000-electron full well and 4 electrons of read noise)."""
    import tifffile

    h, w = shape_for(megapixels)
    s = natural_scene(h, w)
    rng = np.random.default_rng(1)
    full_well, read_e = 20000.0, 4.0
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for ang in (0, 45, 90, 135):
        t = np.radians(ang)
        i = 0.5 * (s[0] + s[1] * np.float32(np.cos(2 * t)) + s[2] * np.float32(np.sin(2 * t)))
        electrons = rng.poisson(np.clip(i, 0, 1.2) * full_well).astype(np.float32)
        electrons += rng.normal(0, read_e, electrons.shape).astype(np.float32)
        dn = np.clip(np.round(electrons / full_well * 65535), 0, 65535).astype(np.uint16)
        p = folder / f"reach_{ang:03d}deg.tif"
        tifffile.imwrite(p, dn)
        paths.append(p)
    return paths


_FLOOR = r'''
import sys, time, os, numpy as np, cv2
files, nbytes, out = sys.argv[1:5], [int(v) for v in sys.argv[5].split(",")], sys.argv[6]
t0 = time.perf_counter()
frames = [cv2.imread(f, cv2.IMREAD_UNCHANGED) for f in files]
t1 = time.perf_counter()
os.makedirs(out, exist_ok=True)
for k, n in enumerate(nbytes):
    np.zeros(n, np.uint8).tofile(os.path.join(out, f"out{k}.bin"))
t2 = time.perf_counter()
print(t1 - t0, t2 - t1)
'''


def target23(work: Path, megapixels: float, repeat: int):
    h, w = shape_for(megapixels)
    print(f"2./3. large bracket: four {h * w / 1e6:.1f} MP ({w}x{h}) 16-bit mono TIFFs, new process ({load()})")
    paths = write_large_bracket(work / "large", megapixels)
    files = [str(p) for p in paths]
    py = sys.executable
    run([py, "-m", "polarsky", "stokes", *files, "--out", str(work / "L-warm"), "--no-pictures"])  # caches warm
    shutil.rmtree(work / "L-warm", ignore_errors=True)
    best = None
    for _ in range(repeat):
        shutil.rmtree(work / "L", ignore_errors=True)
        wall, cpu, r = run([py, "-c", _MEASURED, "stokes", *files, "--out", str(work / "L"), "--json"])
        peak = next(int(l.split()[1]) * 1024 for l in r.stderr.splitlines() if l.startswith("VMHWM"))
        if best is None or wall < best[0]:
            best = (wall, cpu, peak, json.loads(r.stdout))
    wall, cpu, peak, summary = best
    outs = [work / "L" / n for n in summary["outputs"]]
    sizes = [p.stat().st_size for p in outs]
    nc_bytes = (work / "L" / "stokes.nc").stat().st_size
    floors = []
    for _ in range(repeat):
        shutil.rmtree(work / "floor", ignore_errors=True)
        fw, _, fr = run([py, "-c", _FLOOR, *files, ",".join(map(str, sizes)), str(work / "floor")])
        t_dec, t_wr = map(float, fr.stdout.split())
        floors.append((fw, t_dec, t_wr))
    fw, t_dec, t_wr = min(floors)
    st = summary["timing_s"]
    print(f"   {'':<52} {'s':>9}")
    row("I/O floor: new process, OpenCV decode, write as many bytes", fw, "s", f"decode {t_dec:.2f} s, write {t_wr:.2f} s "
        f"({sum(sizes) / 1e6:.0f} MB)", True)
    row("polarsky stokes, whole command", wall, "s", f"<= 2x floor = {2 * fw:.2f} s ({wall / fw:.2f}x)", wall <= 2 * fw)
    print("   stages of the command (in-process): " + ", ".join(f"{k} {v:.2f}" for k, v in st.items() if v is not None)
          + f"; CPU {cpu:.2f} s")
    print(f"   read {st['read']:.2f} s vs decode floor {t_dec:.2f} s; estimate {st['estimate']:.2f} s; NetCDF "
          f"{st['write_netcdf']:.2f} s + pictures {st['write_pictures']:.2f} s vs write floor {t_wr:.2f} s")
    decoded = 4 * h * w * 4
    row("peak memory (VmHWM) / decoded frames as float32", peak / decoded, "x", f"<= 2.5x ({peak / 1e6:.0f} MB of "
        f"{decoded / 1e6:.0f} MB)", peak <= 2.5 * decoded)
    raw = 9 * h * w * 4
    row("stokes.nc / nine float32 maps (24 MP scene)", nc_bytes / raw, "", f"<= 0.4 ({nc_bytes / 1e6:.0f} MB of "
        f"{raw / 1e6:.0f} MB)", nc_bytes <= 0.4 * raw)
    return {"command_s": wall, "floor_s": fw, "peak_ratio": peak / decoded, "nc_ratio": nc_bytes / raw}


# ---------------------------------------------------------------------------- kernel choice by size
_ESTIMATE = r'''
import sys, time
t0 = time.perf_counter()
from polarsky.options.settings import Settings
from polarsky.tasks._common import open_source
from polarsky.estimate.runner import run_blocks
from polarsky.estimate.sinks import StatsSink
compiled = sys.argv[1] == "compiled"
op = open_source(sys.argv[2:], Settings(), compiled=compiled)
run_blocks(op.source, op.noise, [StatsSink(op.source.shape, len(op.source.channels), compiled=compiled)])
print(time.perf_counter() - t0)
'''


def kernel_choice(work: Path, repeat: int):
    """New process: read + estimate every product with each path, at several sizes; the path
    polarsky chooses (polarsky.estimate.runner.COMPILED_MIN_VALUES) should be the faster."""
    from polarsky.estimate.runner import use_compiled
    from tests.synth import render_frames, smooth_scene, write_tiffs

    print(f"   kernel choice (new process, read + all products; {load()}):")
    print(f"   {'values':>12} {'numpy':>8} {'compiled':>9}  chosen")
    for h, w in ((480, 640), (1000, 1000), (1500, 2000), (2400, 3200)):
        folder = work / f"k{h}"
        angles = [0, 45, 90, 135]
        paths = [str(p) for p in write_tiffs(folder, render_frames(smooth_scene(h, w), angles, noise=0.003), angles)]
        n_values = 4 * h * w
        times = {}
        for kind in ("numpy", "compiled"):
            times[kind] = min(float(run([sys.executable, "-c", _ESTIMATE, kind, *paths])[2].stdout)
                              for _ in range(repeat))
        chosen = "compiled" if use_compiled(n_values) else "numpy"
        best = min(times, key=times.get)
        print(f"   {n_values:>12,} {times['numpy']:7.2f}s {times['compiled']:8.2f}s  {chosen}"
              + ("" if chosen == best else f"  (the {best} path was faster)"))


# ---------------------------------------------------------------------------- 5. storage on the demo
def target5(work: Path):
    import warnings

    from polarsky.errors import PolarskyWarning
    from polarsky.synthetic.harbour import render_scene, write_bracket
    from polarsky.tasks.stokes import run_stokes

    print(f"5. storage: stokes.nc of the demo bracket ({load()})")
    frames = write_bracket(render_scene(), work / "demo-frames")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", PolarskyWarning)
        run_stokes(frames, work / "demo-std", pictures=False, align=True)
        run_stokes(frames, work / "demo-full", pictures=False, align=True, precision="full")
    h, w, c = 320, 480, 3
    raw = 9 * h * w * c * 4
    std = (work / "demo-std" / "stokes.nc").stat().st_size
    full = (work / "demo-full" / "stokes.nc").stat().st_size
    row("demo stokes.nc (standard precision) / float32 maps", std / raw, "", f"<= 0.4 ({std / 1e6:.2f} MB of "
        f"{raw / 1e6:.2f} MB)", std <= 0.4 * raw)
    print(f"   --precision full: {full / raw:.3f} ({full / 1e6:.2f} MB); the large scene's figure is under 2./3.")
    return {"demo_ratio": std / raw}


# ---------------------------------------------------------------------------- 6. pictures
def target6(work: Path, repeat: int):
    from polarsky.estimate.runner import run_blocks
    from polarsky.estimate.sinks import PreviewSink
    from polarsky.options.settings import Settings
    from polarsky.tasks._common import open_source
    from polarsky.write.pictures.maps import stokes_pictures

    print(f"6. pictures from the previews (4 pictures of a 1024-pixel-wide preview, warm cache; {load()})")
    frames = small_bracket(work / "pic", h=768, w=1024)
    op = open_source(frames, Settings())
    prev = PreviewSink(op.source.shape)
    run_blocks(op.source, op.noise, [prev])
    arrays = prev.finish()
    (work / "pic-out").mkdir()
    stokes_pictures(arrays, work / "pic-out", channels=op.source.channels, step=prev.step)  # warm the cache
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        stokes_pictures(arrays, work / "pic-out", channels=op.source.channels, step=prev.step)
        times.append(time.perf_counter() - t)
    per = min(times) / 4
    row("one map picture (mean of dolp, aolp, polarization, residual)", per, "s", "<= 0.15 s", per <= 0.15)
    print("   matplotlib imported while drawing with a warm cache: "
          + ("yes" if _matplotlib_drawn(work, frames) else "no"))
    return {"picture_s": per}


def _matplotlib_drawn(work, frames) -> bool:
    code = ("import sys; from polarsky.tasks.stokes import run_stokes; "
            f"run_stokes({[str(f) for f in frames]!r}, {str(work / 'pic-mpl')!r}); "
            "print('matplotlib' in sys.modules)")
    shutil.rmtree(work / "pic-mpl", ignore_errors=True)
    return run([sys.executable, "-c", code])[2].stdout.strip() == "True"


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", default="1,2,3,4,5,6,7", help="targets to measure, e.g. 1,5,6")
    ap.add_argument("--megapixels", type=float, default=24.0, help="size of the large bracket (targets 2, 3)")
    ap.add_argument("--repeat", type=int, default=3, help="runs per figure (the best is kept)")
    ap.add_argument("--keep", action="store_true", help="keep the work folder")
    args = ap.parse_args(argv)
    only = {int(v) for v in args.only.split(",")}
    import polarsky

    print(f"polarsky {polarsky.__version__}, Python {sys.version.split()[0]}, {os.cpu_count()} CPUs, {load()}")
    work = Path(tempfile.mkdtemp(prefix="polarsky-speed-"))
    try:
        if 1 in only:
            target1(work, args.repeat)
            kernel_choice(work, args.repeat)
        if only & {2, 3}:
            target23(work, args.megapixels, max(1, args.repeat - 1))
        if 5 in only:
            target5(work)
        if 6 in only:
            target6(work, args.repeat)
        if only & {4, 7}:
            sys.stdout.flush()
            # bench_batch.py always measures target 7 (its small brackets also warm the workers);
            # the mosaic sequences of target 4 only when asked for
            extra = [] if 4 in only else ["--no-mosaic"]
            subprocess.run([sys.executable, str(ROOT / "benchmarks" / "bench_batch.py"), *extra], check=True)
    finally:
        if not args.keep:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
