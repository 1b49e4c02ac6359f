"""Batch throughput: brackets per second with 1 and 2 workers, scaling, batch overhead.

Usage (from the repository root)::

    python benchmarks/bench_batch.py [--brackets 40] [--size 64x48] [--pictures]

Prints

* the time per bracket of calling the Stokes step directly (``run_stokes``, same options,
  one process, sequential);
* brackets per second of ``run_batch`` on a local cluster with 1 and with 2 worker
  processes (workers started and warmed up before the clock starts; cluster start-up is
  printed apart);
* the scaling ratio (target >= 1.7 on a 2-core machine) and the per-bracket overhead of
  the batch machinery (hashing, thumbnails, completion marker, rename, dask scheduling,
  summary.csv and report.html) over the direct call (target < 10 %).

By default the PNG maps are off (``--pictures`` turns them on); without them a bracket
is cheapest, so the overhead share is largest.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from polarsky.batch import runner  # noqa: E402
from polarsky.batch.config import merge_settings  # noqa: E402
from polarsky.batch.runner import run_batch  # noqa: E402
from polarsky.batch.synthetic import write_bracket  # noqa: E402


def _warm():
    import polarsky.batch.report  # noqa: F401

    runner.step_functions()
    return os.getpid()


def _system_busy() -> float:
    """CPU seconds all processes of the machine have been busy (all cores)."""
    import psutil

    t = psutil.cpu_times()
    return t.user + t.system + getattr(t, "nice", 0.0) + getattr(t, "irq", 0.0) + getattr(t, "softirq", 0.0)


def _cpu_seconds() -> float:
    """CPU seconds (user + system) used so far by this process and its live children."""
    import psutil

    me = psutil.Process()
    total = sum(me.cpu_times()[:2])
    for child in me.children(recursive=True):
        try:
            total += sum(child.cpu_times()[:2])
        except psutil.Error:
            pass
    return total


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--brackets", type=int, default=40)
    ap.add_argument("--size", default="64x48", help="frame size WIDTHxHEIGHT")
    ap.add_argument("--pictures", action="store_true", help="also write the PNG maps")
    ap.add_argument("--repeat", type=int, default=2, help="timed repetitions (best is printed)")
    a = ap.parse_args(argv)
    width, height = (int(v) for v in a.size.lower().split("x"))
    settings = merge_settings({"stokes": {"pictures": bool(a.pictures)}})
    work = Path(tempfile.mkdtemp(prefix="polarsky-bench-batch-"))
    try:
        root = work / "in"
        for i in range(a.brackets):
            write_bracket(root / f"set{i % 4}", f"scene{i:03d}", height=height, width=width, seed=i)
        warm_root = work / "warm"
        for i in range(4):
            write_bracket(warm_root, f"w{i}", height=height, width=width, seed=100 + i)
        brackets = runner.list_brackets(root, settings=settings)
        print(f"{len(brackets)} brackets of 4 frames {width}x{height}, pictures {'on' if a.pictures else 'off'}, "
              f"{os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.1f} at start "
              "(other work on the machine skews the scaling ratio)")

        # direct: the Stokes step alone, sequential, in this process, with the same one thread
        # per process as a batch worker (runner.WORKER_ENV)
        import numba

        all_threads = numba.get_num_threads()
        numba.set_num_threads(1)
        run_stokes = runner.step_functions()[0]
        opts = {k: v for k, v in settings["stokes"].items() if v is not None}
        run_stokes([str(f) for f in brackets[0].frames], work / "direct-warm", angles_deg=list(brackets[0].angles_deg),
                   **opts)
        direct, direct_cpu = [], []
        for rep in range(a.repeat):
            t0, c0 = time.perf_counter(), time.process_time()
            for b in brackets:
                run_stokes([str(f) for f in b.frames], work / f"direct{rep}" / b.name, angles_deg=list(b.angles_deg),
                           **opts)
            direct.append((time.perf_counter() - t0) / len(brackets))
            direct_cpu.append((time.process_time() - c0) / len(brackets))
        t_direct = min(direct)
        cpu_direct = min(direct_cpu)
        print(f"direct run_stokes (1 thread, as a worker): {t_direct * 1e3:.1f} ms per bracket "
              f"({1 / t_direct:.2f} brackets/s)")
        numba.set_num_threads(all_threads)
        t0 = time.perf_counter()
        for b in brackets:
            run_stokes([str(f) for f in b.frames], work / "direct-all" / b.name, angles_deg=list(b.angles_deg), **opts)
        t_all = (time.perf_counter() - t0) / len(brackets)
        print(f"direct run_stokes ({all_threads} kernel threads, for reference): {t_all * 1e3:.1f} ms per bracket")

        rates = {}
        per_bracket = {}
        cpu_per_bracket = {}
        for n in (1, 2):
            t0 = time.perf_counter()
            with runner.batch_client(workers=n, scheduler=None, scratch=work / f"scratch{n}") as client:
                client.run(_warm)
                t_start = time.perf_counter() - t0
                run_batch(warm_root, work / f"warm-out{n}", settings=settings, client=client)
                times, cpus, others, busy = [], [], [], []
                for rep in range(a.repeat):
                    out = work / f"out{n}-{rep}"
                    c1, s1 = _cpu_seconds(), _system_busy()
                    t1 = time.perf_counter()
                    result = run_batch(root, out, settings=settings, client=client)
                    wall = time.perf_counter() - t1
                    mine = _cpu_seconds() - c1
                    times.append(wall)
                    cpus.append(mine / len(brackets))
                    others.append(max(0.0, (_system_busy() - s1 - mine) / wall))
                    busy.append(sum(r["time_s"] for r in result["rows"]) / (wall * n))
                    assert result["done"] == len(brackets), result["failed"]
            best = min(times)
            k = times.index(best)
            cpu_per_bracket[n] = min(cpus)
            rates[n] = len(brackets) / best
            per_bracket[n] = best / len(brackets)
            print(f"batch, {n} worker{'s' if n > 1 else ''}: {rates[n]:.2f} brackets/s "
                  f"({per_bracket[n] * 1e3:.1f} ms per bracket; runs {', '.join(f'{t:.2f}' for t in times)} s; "
                  f"cluster start + warm-up {t_start:.1f} s)")
            print(f"    in the best run: workers busy {busy[k] * 100:.0f} % of the time; other processes on the "
                  f"machine used {others[k]:.2f} of its {os.cpu_count()} cores")
        ratio = rates[2] / rates[1]
        overhead = per_bracket[1] / t_direct - 1.0
        print(f"scaling ratio 2 vs 1 workers: {ratio:.2f} (target >= 1.7)")
        print(f"batch overhead per bracket over the direct Stokes call (1 worker, wall clock): {overhead * 100:.1f} % "
              f"(target < 10 %)")
        cpu_overhead = cpu_per_bracket[1] / cpu_direct - 1.0
        print(f"same in CPU time (driver + scheduler + workers vs the direct call; not skewed by other load): "
              f"{cpu_per_bracket[1] * 1e3:.1f} vs {cpu_direct * 1e3:.1f} ms per bracket = {cpu_overhead * 100:.1f} %")
        print(f"load average at end: {os.getloadavg()[0]:.1f}")
        spread = statistics.pstdev(direct) / t_direct * 100 if len(direct) > 1 else 0.0
        print(f"(direct-call spread between repetitions: {spread:.1f} %)")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
