"""One bracket of a batch, on a worker: the same tasks as the commands, into one folder.

:func:`process_bracket` hashes the bracket's inputs and settings, skips it when a complete
output folder with the same hash exists, and otherwise runs the steps of ``stokes`` (and
``advise`` and ``sky`` when the settings ask for them) into
``DIR/.polarsky-tmp/<name>.<pid>.<random>/`` -- the same step code the commands use, fed by
one read and one estimate of the frames -- makes the report's thumbnails from the pictures in
memory, writes ``batch.json`` last and renames the folder to ``DIR/<name>``.  The summary row
is read from the results by their documented keys.
"""

from __future__ import annotations

import dataclasses
import os
import shutil
import time
import uuid
from pathlib import Path

from .._version import __version__
from ..errors import InputError, one_line
from ..options.syntax import format_angle_list
from . import state
from .discover import Bracket

__all__ = ["process_bracket", "process_brackets", "SUMMARY_COLUMNS", "bracket_settings", "make_row"]

#: Columns of summary.csv, in order (angles in the --angles syntax, so a row can be pasted back).
SUMMARY_COLUMNS = [
    "name", "status", "error", "frames", "analyzer_angles_deg", "mean_dolp", "best_angle_deg", "reduction_stops",
    "rms_dolp_residual", "rms_aolp_residual_deg", "time_s", "source", "rule", "warnings",
]


def _shown(value):
    """Text for the summary: bytes of file names that are not UTF-8 become U+FFFD (the row
    travels between processes and into UTF-8 files, which refuse them)."""
    if isinstance(value, str):
        return value.encode("utf-8", "surrogateescape").decode("utf-8", "replace")
    return value


def make_row(bracket: Bracket, **values) -> dict:
    row = {c: "" for c in SUMMARY_COLUMNS}
    row.update(name=bracket.name, frames=len(bracket.frames), source=bracket.label, rule=bracket.rule,
               analyzer_angles_deg=format_angle_list(bracket.angles_deg) if bracket.angles_deg else "")
    row.update({k: v for k, v in values.items() if v is not None})
    return {k: _shown(v) for k, v in row.items()}


def bracket_settings(settings, bracket: Bracket):
    """The batch settings with this bracket's angles (its manifest, its file names or the batch's)."""
    if bracket.rule == "mosaic":
        return settings
    if bracket.manifest is not None:
        read = dataclasses.replace(settings.read, manifest=Path(bracket.manifest), angles=None)
    else:
        read = dataclasses.replace(settings.read, manifest=None, angles=tuple(bracket.angles_deg or ()) or None)
    return dataclasses.replace(settings, read=read)


def _settings_key(settings) -> dict:
    d = dataclasses.asdict(settings)
    for k in ("given", "cluster", "discovery", "workbench"):
        d.pop(k, None)
    d["report"].pop("embed_images", None)
    return d


def _input_files(bracket: Bracket, settings):
    files = list(bracket.frames)
    if bracket.manifest is not None:
        files.append(bracket.manifest)
    if settings.estimate.calibration is not None:
        from ..read.calibration_file import find_calibration

        files.append(find_calibration(settings.estimate.calibration))
    for region in (settings.advise.region, settings.advise.protect, settings.sky.sky_mask):
        if region is not None and region.path is not None:
            files.append(region.path)
    return files


def _reason(exc: BaseException) -> str:
    """The one-line reason of a failed row (never a traceback, never a staging folder's name)."""
    if isinstance(exc, InputError):
        return str(exc)
    if isinstance(exc, OSError):
        name = f" {Path(exc.filename).name}" if exc.filename else ""
        return one_line(f"cannot read or write{name} ({exc.strerror or type(exc).__name__})")
    return one_line(f"internal error ({type(exc).__name__}: {exc}); please report it")


def _mean(per_channel: dict | None):
    vals = [v for v in (per_channel or {}).values() if isinstance(v, (int, float))]
    return round(sum(vals) / len(vals), 6) if vals else None


def process_bracket(task: dict) -> dict:
    """Process one bracket (runs on a dask worker); return its summary row.

    ``task`` holds ``bracket`` (a :class:`Bracket`), ``out_dir``, ``settings``, ``sky``
    (compare with the sky model) and ``run_id``.  Never raises for a problem of the bracket
    itself: that is a failed row.
    """
    t0 = time.perf_counter()
    bracket: Bracket = task["bracket"]
    out_dir = Path(task["out_dir"]).resolve()
    final = (out_dir / bracket.name).resolve()
    if final.parent != out_dir or bracket.name.startswith("."):  # never write outside DIR
        return make_row(bracket, status="failed", error=f"unsafe bracket name {bracket.name!r}")
    if bracket.problem:
        return make_row(bracket, status="failed", error=bracket.problem, time_s=round(time.perf_counter() - t0, 3))
    try:
        settings = bracket_settings(task["settings"], bracket)
        key = state.bracket_key(_input_files(bracket, settings),
                                {"bracket": bracket.as_key(), "settings": _settings_key(settings),
                                 "sky": bool(task["sky"])}, __version__)
    except (OSError, InputError) as exc:
        return make_row(bracket, status="failed", error=f"cannot read the inputs: {_reason(exc)}")
    marker = state.read_complete(final)
    if marker is not None and marker.get("key") == key:
        row = dict(marker["row"])
        # finished by this same run (a task retried after its worker died): done, not skipped
        row["status"] = "done" if marker.get("run_id") == task["run_id"] else "skipped"
        return row
    tmp = out_dir / state.TMP_DIR / f"{bracket.name}.{os.getpid()}.{uuid.uuid4().hex[:12]}"
    tmp.mkdir(parents=True)
    try:
        row = _run(bracket, settings, tmp, sky=task["sky"], t0=t0)
        state.write_marker(tmp, key=key, row=row, run_id=task["run_id"])
        try:
            state.publish(tmp, final)
        except OSError:
            # another process finished the same bracket meanwhile; keep its folder if it matches
            other = state.read_complete(final)
            if other is None or other.get("key") != key:
                raise
        return row
    except Exception as exc:  # a failing bracket must not stop the batch
        return make_row(bracket, status="failed", error=_reason(exc), time_s=round(time.perf_counter() - t0, 3))
    finally:
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)


def _run(bracket: Bracket, settings, tmp: Path, *, sky: bool, t0: float) -> dict:
    """The steps of one bracket into ``tmp``: the frames are read once and estimated in one pass
    whose row blocks feed every step's sinks (the Stokes step's, the advice's, the sky
    comparison's products); each step then writes what its command writes."""
    from ..estimate.runner import run_blocks
    from ..tasks._common import check_estimate, collect_warnings, open_source
    from ..tasks.stokes import StokesOutputs
    from ..write.stage import Into
    from .report import make_thumbnails

    frames = [str(f) for f in bracket.frames]
    dest = Into(tmp, shown_as=tmp.parent.parent / bracket.name)
    advise = settings.advise.region is not None
    mosaic = bracket.rule == "mosaic"
    with collect_warnings(reemit=False) as caught:
        if advise:
            from ..tasks.advise import AdviceOutputs

            AdviceOutputs.check(settings)
        t_start = time.perf_counter()
        op = open_source(frames, settings)
        src = op.source
        with dest:  # a failed write becomes the one-line error naming the bracket's folder
            # one core per worker process: compress stokes.nc in this thread
            job = StokesOutputs(op, dest, settings, write_threads=0)
            sinks = list(job.sinks)
            adv = memory = None
            if advise:
                adv = AdviceOutputs(op, settings, pictures=settings.output.pictures)
                sinks += adv.sinks
            if sky and not mosaic:  # a mosaic's sky step reads its stokes.nc, as 'polarsky sky' would
                from ..estimate.sinks import MemorySink
                from ..tasks.sky import SKY_PRODUCTS

                memory = MemorySink(src.shape, len(src.channels), SKY_PRODUCTS)
                sinks.append(memory)
            with job.writing():
                info = run_blocks(src, op.noise, sinks, rows=job.rows)
                read_warnings = caught.messages()  # what a step reading the frames itself would have seen so far
                job.commit(info)
            summary = job.finish(caught, t_start=t_start)
            values = {"mean_dolp": _mean(summary["mean_dolp"])}
            if adv is not None:
                with collect_warnings() as seen:
                    adv.check_estimate(info)
                advice = adv.write(dest, adv.result(list(dict.fromkeys(read_warnings + seen.messages()))))
                values["best_angle_deg"] = advice["best_angle_deg"]
                values["reduction_stops"] = advice["reduction_stops"]
            if sky:
                from ..tasks.sky import products_in_memory, run_sky

                if mosaic:
                    # a mosaic's sky step reads its Stokes result (its frame still gives the EXIF and the inputs named)
                    from ..read.stokes_file import read_stokes

                    result = run_sky(frames, dest, settings, stokes=read_stokes(tmp / "stokes.nc"))
                else:
                    with collect_warnings() as seen:  # the check the sky step's own pass would make
                        check_estimate(info, settings, src.channels)
                    result = run_sky(frames, dest, settings, stokes=products_in_memory(memory, op),
                                     warnings=list(dict.fromkeys(read_warnings + seen.messages())))
                values["rms_dolp_residual"] = result["rms_dolp_residual"]
                values["rms_aolp_residual_deg"] = result["rms_aolp_residual_deg"]
            make_thumbnails(tmp, frames, px=settings.report.thumbnail_px, best_angle_deg=values.get("best_angle_deg"),
                            pictures=job.pictures, first_frame=_first_frame(op))
        warn_text = " | ".join(sorted({one_line(m) for m in caught.messages()}))
    row = make_row(bracket, status="done", warnings=warn_text, **values)
    if not row["analyzer_angles_deg"]:
        row["analyzer_angles_deg"] = format_angle_list(summary["analyzer_angles_deg"])
    row["time_s"] = round(time.perf_counter() - t0, 3)
    return row


def _first_frame(op):
    """The first frame of an opened input as the report shows it: a bracket's first frame as
    decoded, a mosaic's linear sensor values."""
    if op.bracket is not None:
        return op.bracket.frames[0]
    from ..read.frames import Frame

    return Frame(path=Path(op.inputs[0]), data=op.source.values[None], full_scale=1.0, encoding="linear", kind="raw")


def process_brackets(tasks: list) -> list:
    """Process several brackets in one dask task (rows in the same order)."""
    return [process_bracket(t) for t in tasks]
