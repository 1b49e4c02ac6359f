"""Run every bracket of a folder tree on dask, keep what is done, report the rest.

The driver (:func:`run_batch`) discovers brackets, starts or joins a dask.distributed
cluster, submits one task per bracket and gathers one summary row per bracket.  The task
(:func:`process_bracket`, run on a worker) hashes the bracket's inputs and settings, skips
it when a complete output folder with the same hash exists, and otherwise runs the library
steps (``polarsky.pipeline.run_stokes``, ``polarsky.advice.run_advise``,
``polarsky.sky.run_sky``) into ``DIR/.polarsky-tmp/<name>.<pid>.<random>/``, makes the
report thumbnails, writes ``batch.json`` last and renames the folder to ``DIR/<name>``.

A bracket that fails (unreadable or corrupt frame, missing frame, bad geometry, ...) gets
status ``failed`` and the reason; the other brackets go on.  A local cluster listens on
127.0.0.1 only, keeps its scratch space in ``DIR/.polarsky-scratch`` and has no dashboard
unless asked (then on 127.0.0.1 with a free port).
"""

from __future__ import annotations

import contextlib
import csv
import inspect
import io
import logging
import os
import shutil
import sys
import time
import uuid
import warnings
from pathlib import Path

from .._version import __version__
from ..errors import InputError, PolarskyWarning, one_line
from . import state
from .config import accepted_keywords
from .discover import Bracket, discover_brackets

__all__ = ["run_batch", "list_brackets", "process_bracket", "SUMMARY_COLUMNS", "step_functions"]

SCRATCH_DIR = ".polarsky-scratch"
#: One worker process per core, one thread each: keep the compiled kernels single-threaded
#: too (dask already does this for OpenMP/BLAS), or the workers fight over the cores.
WORKER_ENV = {"NUMBA_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1",
              "OPENBLAS_NUM_THREADS": "1", "DASK_DISTRIBUTED__WORKER__PROFILE__ENABLED": "False"}
#: Quieter housekeeping: the default 20 ms event-loop ticks, 10 ms sampling profiler and
#: 0.5 s system monitor cost about a tenth of a core while brackets take tenths of a second.
WORKER_CONFIG = {
    "distributed.worker.profile.enabled": False,
    "distributed.admin.tick.interval": "1s",
    "distributed.admin.system-monitor.interval": "2s",
    "distributed.admin.system-monitor.gil.enabled": False,
    "distributed.scheduler.work-stealing-interval": "500ms",
    "distributed.worker.memory.monitor-interval": "500ms",
}
LOCK_FILE = ".polarsky-batch.lock"

#: Columns of summary.csv, in order.
SUMMARY_COLUMNS = [
    "name", "status", "error", "frames", "angles_deg", "mean_dolp", "best_angle_deg",
    "reduction_stops", "sky_dolp_residual_rms", "sky_aolp_residual_rms_deg", "time_s",
    "source", "rule", "warnings",
]


# ------------------------------------------------------------------------------ library steps
def step_functions():
    """The library functions the batch calls: ``(run_stokes, run_advise or None, run_sky or None)``."""
    from ..pipeline import run_stokes

    try:
        from ..advice import run_advise
    except ImportError:
        run_advise = None
    try:
        from ..sky import run_sky
    except ImportError:
        try:
            from ..sky.run import run_sky
        except ImportError:
            run_sky = None
    return run_stokes, run_advise, run_sky


def sky_keywords(run_sky) -> set | None:
    """Setting names a ``[sky]`` table may hold (None: cannot tell, accept any)."""
    def named(func):
        return {p.name for p in inspect.signature(func).parameters.values()
                if p.kind in (p.KEYWORD_ONLY, p.POSITIONAL_OR_KEYWORD)}

    names = accepted_keywords(run_sky)
    if names is None:  # run_sky(**options) forwards to polarsky.sky.run (run_sky -> prepare_sky)
        try:
            from ..sky import run as sky_run
        except ImportError:
            return None
        funcs = [getattr(sky_run, "run_sky", None), getattr(sky_run, "prepare_sky", None)]
        if None in funcs:
            return None
        names = named(funcs[0]) | named(funcs[1])
    return names - {"frames", "out_dir", "stokes", "pictures"} - set(_STOKES_KEYS)


_STOKES_KEYS = ("angles_deg", "manifest", "transfer", "max_pixels", "extinction", "angle_offset_deg", "align",
                "calibration", "mosaic", "mosaic_colour", "demosaic", "bit_depth", "black_level")


def _stokes_options(settings: dict, bracket: Bracket) -> dict:
    st = settings["stokes"]
    opts = {k: v for k, v in st.items() if v is not None}
    if bracket.manifest is not None:
        opts["manifest"] = str(bracket.manifest)
    else:
        opts["angles_deg"] = list(bracket.angles_deg) if bracket.angles_deg is not None else None
    return opts


def mosaic_function():
    """``polarsky.mosaic.run_mosaic_stokes`` or None when mosaic support is not installed."""
    try:
        from ..mosaic import run_mosaic_stokes
    except ImportError:
        return None
    return run_mosaic_stokes


def _mosaic_options(settings: dict) -> dict:
    mo, st = settings["mosaic"], settings["stokes"]
    opts = {"mosaic": mo["cell"], "mosaic_colour": mo["colour"], "demosaic": mo["demosaic"],
            "bit_depth": mo["bit_depth"], "black_level": mo["black_level"], "calibration": st["calibration"],
            "transfer": st["transfer"], "max_pixels": st["max_pixels"], "pictures": st["pictures"]}
    return {k: v for k, v in opts.items() if v is not None}


def check_steps(settings: dict) -> None:
    """Fail early (InputError) when the settings ask for something this install cannot do."""
    run_stokes, run_advise, run_sky = step_functions()
    mo = settings["mosaic"]
    if mo["cell"] is not None:
        if mosaic_function() is None:
            raise InputError("mosaic frames are configured ([mosaic] cell / --mosaic) but polarsky.mosaic is not "
                             "available in this installation; remove the mosaic settings or update polarsky")
        from ..mosaic import DEMOSAIC_METHODS, parse_mosaic

        parse_mosaic(mo["cell"], mo["colour"])  # InputError naming a bad cell
        if mo["demosaic"] is not None and mo["demosaic"].lower() not in {k.lower() for k in DEMOSAIC_METHODS}:
            raise InputError(f"[mosaic] demosaic {mo['demosaic']!r} is not one of "
                             f"{', '.join(DEMOSAIC_METHODS)}")
        if settings["advise"]["region"] is not None:
            raise InputError("advice ([advise] region) is not available for mosaic frames in a batch; run "
                             "'polarsky advise' on them or remove the [advise] table")
        for key in ("angles_deg",):
            if settings["discovery"][key] is not None:
                raise InputError("[discovery] angles_deg (--angles) does not apply to mosaic frames: the cell "
                                 "gives the angles")
        for key in ("extinction", "align"):
            if settings["stokes"][key] not in (None, False):
                raise InputError(f"[stokes] {key} does not apply to mosaic frames; remove it")
        if settings["stokes"]["angle_offset_deg"]:
            raise InputError("[stokes] angle_offset_deg does not apply to mosaic frames; use a calibration file")
    if settings["advise"]["region"] is not None and run_advise is None:
        raise InputError("advice is configured ([advise] region) but polarsky.advice is not available "
                         "in this installation; remove the [advise] table")
    if settings["sky"]:
        if run_sky is None:
            raise InputError("a sky comparison is configured ([sky] table) but polarsky.sky.run_sky is not "
                             "available in this installation; remove the [sky] table or update polarsky")
        allowed = sky_keywords(run_sky)
        if allowed is not None:
            bad = sorted(k for k in settings["sky"] if k not in allowed)
            if bad:
                raise InputError(f"unknown key(s) in [sky]: {', '.join(bad)}; "
                                 f"the sky comparison accepts {', '.join(sorted(allowed))}")


# ------------------------------------------------------------------------------ worker side
def _mean_dolp(summary, folder: Path):
    if isinstance(summary, dict):
        for key in ("mean_dolp", "dolp_mean"):
            v = summary.get(key)
            if isinstance(v, dict):  # per channel: the mean over the channels
                vals = [float(x) for x in v.values() if isinstance(x, (int, float))]
                v = sum(vals) / len(vals) if vals else None
            if isinstance(v, (int, float)):
                return float(v)
        d = summary.get("dolp")
        if isinstance(d, dict):
            for key in ("mean", "mean_valid"):
                if isinstance(d.get(key), (int, float)):
                    return float(d[key])
    nc = folder / "stokes.nc"
    if nc.is_file():
        import xarray as xr

        with xr.open_dataset(nc, chunks={}) as ds:
            dolp = ds["dolp"]
            if "valid" in ds:
                dolp = dolp.where(ds["valid"])
            return float(dolp.mean().compute())
    return None


def _find_number(d, *words):
    """First numeric value in a (nested) dict whose key contains every word."""
    if not isinstance(d, dict):
        return None
    for k, v in d.items():
        if isinstance(v, (int, float)) and not isinstance(v, bool) and all(w in k.lower() for w in words):
            return float(v)
    for v in d.values():
        if isinstance(v, dict):
            found = _find_number(v, *words)
            if found is not None:
                return found
    return None


def _first_number(d, *word_sets):
    if isinstance(d, dict):
        for words in word_sets:
            if len(words) == 1 and isinstance(d.get(words[0]), (int, float)) and not isinstance(d[words[0]], bool):
                return float(d[words[0]])
        for words in word_sets:
            found = _find_number(d, *words)
            if found is not None:
                return found
    return None


def _row(bracket: Bracket, **values) -> dict:
    row = {c: "" for c in SUMMARY_COLUMNS}
    row.update(name=bracket.name, frames=len(bracket.frames), source=bracket.label, rule=bracket.rule,
               angles_deg=";".join(f"{a:g}" for a in bracket.angles_deg) if bracket.angles_deg else "")
    row.update({k: v for k, v in values.items() if v is not None})
    return row


def _region_text(value):
    """A box as the text ``x0,y0,x1,y1``; a mask path unchanged; None stays None."""
    if value is None or isinstance(value, str):
        return value
    return ",".join(str(int(v)) for v in value)


def _reason(exc: BaseException) -> str:
    if isinstance(exc, InputError):
        return str(exc)
    return one_line(f"{type(exc).__name__}: {exc}")


def _input_files(bracket: Bracket, settings: dict):
    files = list(bracket.frames)
    if bracket.manifest is not None:
        files.append(bracket.manifest)
    if settings["stokes"].get("calibration"):
        files.append(Path(settings["stokes"]["calibration"]))
    for key in ("region", "protect"):
        if isinstance(settings["advise"].get(key), str):
            files.append(Path(settings["advise"][key]))
    return files


def _key_settings(bracket: Bracket, settings: dict) -> dict:
    d = bracket.as_dict()
    d.pop("reason")
    d["frames"] = [Path(f).name for f in bracket.frames]
    d["manifest"] = Path(bracket.manifest).name if bracket.manifest else None
    return {"bracket": d, "stokes": settings["stokes"], "advise": settings["advise"], "sky": settings["sky"],
            "mosaic": settings["mosaic"], "thumbnail_px": settings["report"]["thumbnail_px"]}


def process_bracket(task: dict) -> dict:
    """Process one bracket (runs on a dask worker); return its summary row.

    ``task`` holds ``bracket`` (a :class:`Bracket`), ``out_dir``, ``settings`` and
    ``run_id``.  Never raises for a problem of the bracket itself: that is a failed row.
    """
    t0 = time.perf_counter()
    bracket: Bracket = task["bracket"]
    settings = task["settings"]
    out_dir = Path(task["out_dir"]).resolve()
    final = (out_dir / bracket.name).resolve()
    if final.parent != out_dir or bracket.name.startswith("."):  # never write outside DIR
        return _row(bracket, status="failed", error=f"unsafe bracket name {bracket.name!r}")
    if bracket.problem:
        return _row(bracket, status="failed", error=bracket.problem,
                    time_s=round(time.perf_counter() - t0, 3))
    try:
        key = state.bracket_key(_input_files(bracket, settings), _key_settings(bracket, settings), __version__)
    except OSError as exc:
        return _row(bracket, status="failed", error=f"cannot read the inputs: {exc}")
    marker = state.read_complete(final)
    if marker is not None and marker.get("key") == key:
        row = dict(marker["row"])
        # finished by this same run (a task retried after its worker died): done, not skipped
        row["status"] = "done" if marker.get("run_id") == task["run_id"] else "skipped"
        return row
    tmp = out_dir / state.TMP_DIR / f"{bracket.name}.{os.getpid()}.{uuid.uuid4().hex[:12]}"
    tmp.mkdir(parents=True)
    caught = []
    try:
        run_stokes, run_advise, run_sky = step_functions()
        opts = _stokes_options(settings, bracket)
        frames = [str(f) for f in bracket.frames]
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", PolarskyWarning)
            if bracket.rule == "mosaic":
                summary = mosaic_function()(frames, tmp, **_mosaic_options(settings))
            else:
                summary = run_stokes(frames, tmp, **opts)
            values = {"mean_dolp": _mean_dolp(summary, tmp)}
            advice = None
            adv = settings["advise"]
            if adv["region"] is not None:
                region, protect = _region_text(adv["region"]), _region_text(adv["protect"])
                advice = run_advise(frames, tmp, region=region, protect=protect, **opts)
                values["best_angle_deg"] = _first_number(advice, ("best_angle_deg",))
                values["reduction_stops"] = _first_number(advice, ("reduction_stops",))
            if settings["sky"]:
                if bracket.rule == "mosaic":  # the sky step reads the mosaic's Stokes result
                    sky = run_sky([str(tmp / "stokes.nc")], tmp, pictures=settings["stokes"]["pictures"],
                                  **settings["sky"])
                else:
                    sky = run_sky(frames, tmp, **{**opts, **settings["sky"]})
                values["sky_dolp_residual_rms"] = _first_number(sky, ("dolp_rms",), ("dolp", "residual", "rms"))
                values["sky_aolp_residual_rms_deg"] = _first_number(sky, ("aolp_rms_deg",),
                                                                    ("aolp", "residual", "rms"))
        from .report import make_thumbnails

        make_thumbnails(tmp, frames, px=settings["report"]["thumbnail_px"],
                        best_angle_deg=values.get("best_angle_deg"))
        for k in ("mean_dolp", "best_angle_deg", "reduction_stops", "sky_dolp_residual_rms",
                  "sky_aolp_residual_rms_deg"):
            if isinstance(values.get(k), float):
                values[k] = round(values[k], 6)
        warn_text = " | ".join(sorted({one_line(str(w.message)) for w in caught
                                       if issubclass(w.category, PolarskyWarning)}))
        row = _row(bracket, status="done", warnings=warn_text, **values)
        if not row["angles_deg"] and isinstance(summary, dict) and summary.get("analyzer_angles_deg"):
            row["angles_deg"] = ";".join(f"{float(a):g}" for a in summary["analyzer_angles_deg"])
        row["time_s"] = round(time.perf_counter() - t0, 3)
        state.write_marker(tmp, key=key, row=row, run_id=task["run_id"])
        try:
            state.publish(tmp, final)
        except OSError:
            # Another process finished the same bracket meanwhile; keep its folder if it matches.
            other = state.read_complete(final)
            if other is None or other.get("key") != key:
                raise
        return row
    except Exception as exc:  # a failing bracket must not stop the batch
        return _row(bracket, status="failed", error=_reason(exc), time_s=round(time.perf_counter() - t0, 3))
    finally:
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)


# ------------------------------------------------------------------------------ driver side
def list_brackets(root, out_dir=None, *, settings) -> list[Bracket]:
    """Discover the brackets of ``root`` with the batch settings (``out_dir`` is not searched)."""
    d = settings["discovery"]
    return discover_brackets(root, time_gap_s=d["time_gap_s"], angles_deg=d["angles_deg"],
                             manifest_name=d["manifest_name"],
                             exclude_dirs=[out_dir] if out_dir is not None else [],
                             mosaic_cell=settings["mosaic"]["cell"])


@contextlib.contextmanager
def _lock(out_dir: Path):
    import fcntl

    fh = open(out_dir / LOCK_FILE, "a+")
    try:
        try:
            fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            raise InputError(f"another batch is writing to {out_dir}; wait for it or choose another --out") from None
        yield
    finally:
        fh.close()


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


def run_batch(root, out_dir, *, settings: dict, workers: int | None = None, scheduler: str | None = None,
              client=None, progress: bool = False, dashboard: bool = False, on_dashboard=None) -> dict:
    """Process every bracket under ``root`` into ``out_dir``; return the batch result.

    Parameters
    ----------
    root, out_dir : path
        Input folder tree (read only) and output folder (created).
    settings : dict
        From :func:`polarsky.batch.config.merge_settings`.
    workers : int, optional
        Worker processes of the local cluster (default: CPU count, at most one per bracket).
    scheduler : str, optional
        Address of an existing dask.distributed scheduler (``tcp://host:port``); the
        workers must see ``root`` and ``out_dir`` under the same paths.
    client : distributed.Client, optional
        Use this client (for tests and embedding) instead of making one.
    progress : bool
        Show a tqdm progress bar on stderr.

    Returns
    -------
    dict
        ``rows`` (one dict per bracket, discovery order), counts ``done``, ``skipped``,
        ``failed``, the paths ``summary_csv`` and ``report_html``, and ``elapsed_s``.
    """
    t0 = time.perf_counter()
    root = Path(root)
    out_dir = Path(out_dir).resolve()
    check_steps(settings)
    brackets = list_brackets(root, out_dir, settings=settings)  # checks ROOT before DIR is made
    if out_dir.exists() and not out_dir.is_dir():
        raise InputError(f"--out {out_dir} exists and is not a folder; give a folder path")
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create the output folder {out_dir}: {exc.strerror}") from None
    run_id = f"{time.strftime('%Y%m%dT%H%M%S')}-{uuid.uuid4().hex[:8]}"
    rows: dict[int, dict] = {}
    with _lock(out_dir):
        shutil.rmtree(out_dir / state.TMP_DIR, ignore_errors=True)  # leftovers of a killed run
        if brackets:
            tasks = [{"bracket": b, "out_dir": str(out_dir), "settings": settings, "run_id": run_id}
                     for b in brackets]
            n_workers = workers or min(os.cpu_count() or 1, len(brackets))
            with contextlib.ExitStack() as stack:
                if client is None:
                    client = stack.enter_context(batch_client(
                        workers=n_workers, scheduler=scheduler, scratch=out_dir / SCRATCH_DIR,
                        dashboard=dashboard))
                    if dashboard and on_dashboard is not None and client.dashboard_link:
                        on_dashboard(client.dashboard_link)
                rows = _gather(client, tasks, run_id, progress)
        shutil.rmtree(out_dir / state.TMP_DIR, ignore_errors=True)
        shutil.rmtree(out_dir / SCRATCH_DIR, ignore_errors=True)
        ordered = [rows[i] for i in range(len(brackets))]
        write_summary_csv(out_dir / "summary.csv", ordered)
        from .report import write_report

        notes = []
        if settings["sky"]:
            notes.append("Caution: never look at the sun through a viewfinder or optics and do not aim "
                         "sensors at it; follow local codes and licensed practice for work at height or near water.")
        write_report(out_dir / "report.html", ordered, out_dir=out_dir,
                     title=f"polarsky batch: {root.resolve().name}", notes=notes,
                     embed_images=_embed(settings["report"]["embed_images"], len(ordered)))
    counts = {s: sum(r["status"] == s for r in ordered) for s in ("done", "skipped", "failed")}
    return {"root": str(root.resolve()), "out": str(out_dir), "brackets": len(ordered), **counts,
            "summary_csv": str(out_dir / "summary.csv"), "report_html": str(out_dir / "report.html"),
            "elapsed_s": round(time.perf_counter() - t0, 3), "rows": ordered}


def process_brackets(tasks: list) -> list:
    """Process several brackets in one dask task (rows in the same order)."""
    return [process_bracket(t) for t in tasks]


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
                got = [_row(tasks[i]["bracket"], status="failed", error=_reason(exc)) for i in idx]
            for i, row in zip(idx, got):
                rows[i] = row
                counts[row["status"]] += 1
            bar.set_postfix(counts, refresh=False)
            bar.update(len(idx))
    finally:
        bar.close()
    return rows
