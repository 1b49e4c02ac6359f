"""Run every bracket of a folder tree on dask, keep what is done, report the rest.

The driver (:func:`run_batch`) checks the settings, discovers the brackets, starts or joins a
dask.distributed cluster, submits the brackets (:func:`polarsky.batch.task.process_bracket`)
and gathers one summary row per bracket into ``summary.csv`` and ``report.html``.

A bracket that fails (unreadable or corrupt frame, missing frame, bad geometry, ...) gets
status ``failed`` and the one-line reason; the other brackets go on.  A local cluster listens
on 127.0.0.1 only, keeps its scratch space in ``DIR/.polarsky-scratch`` and has no dashboard
unless asked (then on 127.0.0.1 with a free port).  While a batch writes to ``DIR`` it holds
a lock on it, so a second batch into the same folder stops with a message.
"""

from __future__ import annotations

import contextlib
import csv
import io
import logging
import os
import shutil
import sys
import time
import uuid
from pathlib import Path

from ..errors import InputError, one_line
from . import state
from .discover import Bracket, discover_brackets
from .task import SUMMARY_COLUMNS, make_row, process_brackets

__all__ = ["run_batch", "list_brackets", "batch_client", "write_summary_csv", "chunk_size"]

SCRATCH_DIR = ".polarsky-scratch"
#: One worker process per core, one thread each: keep the compiled kernels single-threaded
#: too (dask already does this for OpenMP/BLAS), or the workers fight over the cores.
WORKER_ENV = {"NUMBA_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1",
              "OPENBLAS_NUM_THREADS": "1", "POLARSKY_THREADS": "1",
              "DASK_DISTRIBUTED__WORKER__PROFILE__ENABLED": "False"}
#: Quieter housekeeping: the default 20 ms event-loop ticks, 10 ms sampling profiler and
#: 0.5 s system monitor cost about a tenth of a core while brackets take tenths of a second.
WORKER_CONFIG = {
    "distributed.worker.profile.enabled": False,
    "distributed.admin.tick.interval": "1s",
    "distributed.admin.system-monitor.interval": "2s",
    "distributed.admin.system-monitor.gil.enabled": False,
    "distributed.scheduler.work-stealing-interval": "500ms",
    "distributed.worker.memory.monitor-interval": "500ms",
    # dask starts workers with MALLOC_TRIM_THRESHOLD_=65536, which also switches off glibc's
    # dynamic mmap threshold: every array above 128 KiB is then mapped afresh and its pages
    # faulted in and zeroed (a 5 MP mosaic frame cost 2.3 times the CPU of the same step in a
    # plain process).  None leaves the variable unset: workers allocate as a plain process does.
    "distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None,
}


def check_batch_settings(settings, *, sky: bool) -> None:
    """Refuse, before any bracket runs, settings that cannot work for the whole batch."""
    settings.check_frame_options()
    if settings.mosaic.mosaic is not None and settings.advise.region is not None:
        raise InputError("advice ([advise] region) is not available for mosaic frames in a batch; run "
                         "'polarsky advise --mosaic ...' on them or remove the [advise] table")
    if settings.cluster.workers is not None and settings.cluster.scheduler:
        raise InputError("--workers sizes the local cluster; with --scheduler the cluster's own workers are used")


def list_brackets(root, out_dir=None, *, settings) -> list[Bracket]:
    """Discover the brackets of ``root`` with the batch settings (``out_dir`` is never searched)."""
    exclude = [] if out_dir is None or Path(out_dir).resolve() == Path(root).resolve() else [out_dir]
    return discover_brackets(root, time_gap_s=settings.discovery.time_gap_s, angles_deg=settings.read.angles,
                             exclude_dirs=exclude,
                             mosaic_cell=settings.mosaic.mosaic)


@contextlib.contextmanager
def batch_client(*, workers: int, scheduler: str | None, scratch: Path, dashboard: bool = False,
                 connect_timeout_s: float = 10.0):
    """A dask ``Client``: on ``scheduler`` if given, else on a new loopback-only LocalCluster."""
    from distributed import Client, LocalCluster

    if scheduler:
        try:
            client = Client(scheduler, timeout=f"{connect_timeout_s}s")
        except (OSError, TimeoutError) as exc:
            raise InputError(f"cannot reach the dask scheduler at {scheduler} ({one_line(exc)}); "
                             "start it with 'dask scheduler' or check --scheduler") from None
        try:
            yield client
        finally:
            client.close()
        return
    if dashboard:
        import importlib.util

        if importlib.util.find_spec("bokeh") is None:
            raise InputError("--dashboard needs the bokeh package (pip install 'bokeh>=3.1'); "
                             "or run without --dashboard")
    scratch.mkdir(parents=True, exist_ok=True)
    import dask

    stack = contextlib.ExitStack()
    # the workers' sampling profiler (every 10 ms) costs CPU that brackets need
    stack.enter_context(dask.config.set(WORKER_CONFIG))
    # The scheduler always runs a small HTTP server (health checks); bind it to a free
    # loopback port too, and serve the dashboard pages on it only when asked.
    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                           dashboard_address="127.0.0.1:0", scheduler_kwargs={"dashboard": bool(dashboard)},
                           worker_dashboard_address=None, local_directory=str(scratch),
                           silence_logs=logging.CRITICAL, env=WORKER_ENV)
    try:
        client = Client(cluster)
        try:
            yield client
        finally:
            client.close()
    finally:
        cluster.close()
        stack.close()


#: With embed_images = "auto", pictures are embedded in report.html up to this many brackets
#: (about 40 kB each); beyond, they are linked beside it so the page stays quick to open.
EMBED_LIMIT = 300


def _embed(setting, n_rows: int) -> bool:
    return bool(setting) if setting != "auto" else n_rows <= EMBED_LIMIT


def write_summary_csv(path, rows) -> None:
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=SUMMARY_COLUMNS, extrasaction="ignore", lineterminator="\n")
    w.writeheader()
    for r in rows:
        w.writerow(r)
    state.atomic_write_text(path, buf.getvalue())


def run_batch(root, out_dir, *, settings, sky: bool = False, client=None, progress: bool = False,
              on_dashboard=None) -> dict:
    """Process every bracket under ``root`` into ``out_dir``; return the batch result.

    Parameters
    ----------
    root, out_dir : path
        Input folder tree (read only) and output folder (created; may lie inside ``root``,
        it is never searched).
    settings : Settings
        From :func:`polarsky.batch.config.load_settings`.
    sky : bool
        Compare every bracket with the clear-sky model.
    client : distributed.Client, optional
        Use this client (tests, embedding) instead of making one.
    progress : bool
        Show a progress bar on stderr.

    Returns
    -------
    dict
        ``rows`` (one dict per bracket, discovery order), counts ``done``, ``skipped``,
        ``failed``, the paths ``summary_csv`` and ``report_html``, and ``elapsed_s``.
    """
    from ..write.stage import FolderLock
    from ..write.swap import clean_leftovers_in

    t0 = time.perf_counter()
    root = Path(root)
    if out_dir is None or str(out_dir).strip() == "":
        raise InputError("--out is empty; give the folder for the brackets' outputs, summary.csv and report.html")
    out_dir = Path(out_dir).resolve()
    check_batch_settings(settings, sky=sky)
    brackets = list_brackets(root, out_dir, settings=settings)  # checks ROOT before DIR is made
    if out_dir.exists() and not out_dir.is_dir():
        raise InputError(f"--out {out_dir} exists and is not a folder; give a folder path")
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create the output folder {out_dir}: {exc.strerror}") from None
    run_id = f"{time.strftime('%Y%m%dT%H%M%S')}-{uuid.uuid4().hex[:8]}"
    rows: dict[int, dict] = {}
    cl = settings.cluster
    with FolderLock(out_dir):
        shutil.rmtree(out_dir / state.TMP_DIR, ignore_errors=True)  # leftovers of a killed run
        clean_leftovers_in(out_dir)  # and bracket folders it was replacing
        if brackets:
            tasks = [{"bracket": b, "out_dir": str(out_dir), "settings": settings, "sky": sky, "run_id": run_id}
                     for b in brackets]
            n_workers = cl.workers or min(os.cpu_count() or 1, len(brackets))
            with contextlib.ExitStack() as stack:
                if client is None:
                    client = stack.enter_context(batch_client(
                        workers=n_workers, scheduler=cl.scheduler, scratch=out_dir / SCRATCH_DIR,
                        dashboard=cl.dashboard))
                    if cl.dashboard and on_dashboard is not None and client.dashboard_link:
                        on_dashboard(client.dashboard_link)
                rows = _gather(client, tasks, run_id, progress)
        shutil.rmtree(out_dir / state.TMP_DIR, ignore_errors=True)
        shutil.rmtree(out_dir / SCRATCH_DIR, ignore_errors=True)
        ordered = [rows[i] for i in range(len(brackets))]
        write_summary_csv(out_dir / "summary.csv", ordered)
        from .report import write_report

        notes = []
        if sky:
            from ..conventions import SUN_CAUTION

            notes.append(SUN_CAUTION[0].upper() + SUN_CAUTION[1:] + ".")
        write_report(out_dir / "report.html", ordered, out_dir=out_dir,
                     title=f"polarsky batch: {root.resolve().name}", notes=notes,
                     embed_images=_embed(settings.report.embed_images, len(ordered)))
    counts = {s: sum(r["status"] == s for r in ordered) for s in ("done", "skipped", "failed")}
    return {"root": str(root.resolve()), "out": str(out_dir), "brackets": len(ordered), **counts,
            "summary_csv": str(out_dir / "summary.csv"), "report_html": str(out_dir / "report.html"),
            "elapsed_s": round(time.perf_counter() - t0, 3), "rows": ordered}


#: Brackets with more input bytes than this go one per dask task.
SMALL_BRACKET_BYTES = 16 * 2**20


def chunk_size(n_brackets: int, n_workers: int, mean_bytes: float = 0.0) -> int:
    """Brackets per dask task: 1 for few or large brackets, up to 8 for many small ones (a
    dask task costs milliseconds of scheduling; at least 8 tasks per worker keep the load
    balanced and the progress bar moving).

    >>> chunk_size(10, 2), chunk_size(40, 2), chunk_size(40, 1), chunk_size(10000, 2)
    (1, 2, 5, 8)
    >>> chunk_size(10000, 2, mean_bytes=800e6)
    1
    """
    if mean_bytes > SMALL_BRACKET_BYTES:
        return 1
    return int(max(1, min(8, n_brackets // max(1, 8 * n_workers))))


def _mean_input_bytes(tasks) -> float:
    sizes = []
    for t in tasks[:200]:  # a sample is enough
        total = 0
        for f in t["bracket"].frames:
            try:
                total += os.stat(f).st_size
            except OSError:
                pass
        sizes.append(total)
    return sum(sizes) / len(sizes) if sizes else 0.0


def _gather(client, tasks, run_id, progress) -> dict[int, dict]:
    from distributed import as_completed
    from tqdm import tqdm

    try:
        n_workers = max(1, len(client.scheduler_info().get("workers", {})))
    except Exception:  # scheduler_info needs a live connection; any failure -> 1
        n_workers = 1
    k = chunk_size(len(tasks), n_workers, _mean_input_bytes(tasks))
    futures = {}
    for c0 in range(0, len(tasks), k):
        idx = list(range(c0, min(c0 + k, len(tasks))))
        f = client.submit(process_brackets, [tasks[i] for i in idx], key=f"polarsky-brackets-{run_id}-{c0}",
                          pure=False, priority=-c0)
        futures[f] = idx
    rows: dict[int, dict] = {}
    counts = {"done": 0, "skipped": 0, "failed": 0}
    bar = tqdm(total=len(tasks), unit="bracket", file=sys.stderr, disable=not progress,
               dynamic_ncols=True, smoothing=0.1)
    try:
        for f in as_completed(list(futures)):
            idx = futures[f]
            try:
                got = f.result()
            except Exception as exc:  # the task itself died (e.g. its worker was killed repeatedly)
                why = one_line(str(exc)) or type(exc).__name__
                got = [make_row(tasks[i]["bracket"], status="failed", error=f"the task died ({why}); please report it")
                       for i in idx]
            for i, row in zip(idx, got):
                rows[i] = row
                counts[row["status"]] += 1
            bar.set_postfix(counts, refresh=False)
            bar.update(len(idx))
    finally:
        bar.close()
    return rows
