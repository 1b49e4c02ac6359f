"""What one workbench holds: its entries (brackets and results), the regions, the advice.

Loading (processing a bracket, reading a ``stokes.nc``) runs on one worker thread, one
entry at a time, so the server stays responsive and the machine's cores are not
oversubscribed.  Views beyond a memory budget are dropped (least recently used first)
and loaded again when asked for.
"""

from __future__ import annotations

import queue
import threading
import time
from collections import OrderedDict
from concurrent.futures import Future
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from ..errors import InputError, one_line
from .commandline import advise_command, recipe_from_facts
from .view import View

__all__ = ["Entry", "Session", "NotReady"]

#: Bytes of loaded views kept in memory (the current one is always kept).
MEMORY_BUDGET = 6 << 30
#: Extinction ratios of real filters whose reach the advice panel shows beside an ideal one.
FILTER_ERS = (30.0, 300.0)


class _Worker:
    """One daemon thread that runs submitted calls in order (a load in progress does not
    keep the process alive after Ctrl-C)."""

    def __init__(self):
        self._q: queue.Queue = queue.Queue()
        self._t = threading.Thread(target=self._run, name="polarsky-load", daemon=True)
        self._t.start()

    def submit(self, fn, *args) -> Future:
        fut: Future = Future()
        self._q.put((fut, fn, args))
        return fut

    def _run(self):
        while True:
            item = self._q.get()
            if item is None:
                return
            fut, fn, args = item
            if not fut.set_running_or_notify_cancel():
                continue
            try:
                fut.set_result(fn(*args))
            except BaseException as exc:  # noqa: BLE001 - handed to whoever waits
                fut.set_exception(exc)

    def shutdown(self):
        self._q.put(None)


class NotReady(Exception):
    """The entry is not loaded (yet); the message says why."""


@dataclass
class Entry:
    """One thing the page can show: a bracket to process or a result to read.

    Attributes
    ----------
    status : str
        ``pending`` (not loaded), ``loading``, ``ready``, ``failed`` (``error`` says why) or
        ``unavailable`` (it cannot be loaded at all, e.g. a failed batch bracket).
    version : int
        Increases each time the entry's content changes (a watched bracket that grew).
    """

    id: int
    name: str
    label: str
    kind: str
    load: Callable[[], View] | None
    recipe: dict | None = None
    note: str = ""
    status: str = "pending"
    error: str | None = None
    version: int = 1
    view: View | None = None
    signature: tuple | None = None
    load_s: float | None = None
    used: float = field(default_factory=time.monotonic)

    def public(self) -> dict:
        d = {"id": self.id, "name": self.name, "label": self.label, "kind": self.kind, "status": self.status,
             "error": self.error, "version": self.version, "note": self.note, "load_s": self.load_s}
        if self.view is not None:
            d["width"], d["height"] = self.view.shape[1], self.view.shape[0]
            d["channels"] = self.view.channels
        return d


class Session:
    """The entries, the current choice, the regions and the output folder of one workbench.

    Parameters
    ----------
    out_dir : path
        The only folder the workbench writes into (created on the first save).
    watch : path, optional
        The folder followed by ``--watch`` (for the page's status line).
    """

    def __init__(self, *, out_dir, watch=None, memory_budget: int = MEMORY_BUDGET):
        self.out_dir = Path(out_dir).resolve()
        self.watch = None if watch is None else str(Path(watch).resolve())
        self.entries: list[Entry] = []
        self.lock = threading.RLock()
        self.current: int | None = None
        self.follow = watch is not None
        self.region: str | None = None
        self.protect: str | None = None
        self.changes = 0
        self.memory_budget = memory_budget
        self.messages: list[str] = []
        self._executor = _Worker()
        self._advice: OrderedDict = OrderedDict()
        self._save_lock = threading.Lock()

    # -------------------------------------------------------------- entries
    def add(self, *, name, label, kind, load, recipe=None, note="", status="pending", error=None,
            signature=None) -> Entry:
        from ..batch.discover import safe_name

        with self.lock:
            taken = {e.name.lower() for e in self.entries}
            base, k = safe_name(name), 2
            name = base
            while name.lower() in taken:
                name, k = f"{base}-{k}", k + 1
            e = Entry(id=len(self.entries), name=name, label=label, kind=kind, load=load, recipe=recipe, note=note,
                      status=status, error=error, signature=signature)
            self.entries.append(e)
            if self.current is None and status != "unavailable":
                self.current = e.id
            self.changes += 1
            return e

    def entry(self, entry_id) -> Entry:
        try:
            i = int(entry_id)
        except (TypeError, ValueError):
            raise KeyError(entry_id) from None
        with self.lock:
            if not 0 <= i < len(self.entries):
                raise KeyError(entry_id)
            return self.entries[i]

    def replace(self, e: Entry, *, load, recipe=None, note="", signature=None, status="pending", error=None,
                label=None) -> None:
        """A watched bracket changed (a frame was added): show the new content."""
        with self.lock:
            e.load, e.recipe, e.note, e.signature = load, recipe, note, signature
            e.view, e.status, e.error = None, status, error
            if label is not None:
                e.label = label
            e.version += 1
            self.changes += 1
            self._forget_advice(e.id)

    def select(self, entry_id) -> Entry:
        e = self.entry(entry_id)
        with self.lock:
            self.current = e.id
            self.changes += 1
        return e

    # -------------------------------------------------------------- loading
    def load_now(self, e: Entry) -> Entry:
        """Load ``e`` on the loading thread and wait for it."""
        self._executor.submit(self._load, e).result()
        return e

    def request(self, e: Entry) -> str:
        """Start loading ``e`` in the background if needed; return its status."""
        with self.lock:
            if e.status == "pending":
                e.status = "loading"
                self.changes += 1
                self._executor.submit(self._load, e)
            e.used = time.monotonic()
            return e.status

    def _load(self, e: Entry) -> None:
        with self.lock:
            if e.status in ("ready", "unavailable"):
                return
            e.status = "loading"
            version = e.version
            load = e.load
        t0 = time.perf_counter()
        try:
            view = load()
            error = None
        except InputError as exc:
            view, error = None, str(exc)
        except MemoryError:
            view, error = None, "not enough memory to load this result"
        except Exception as exc:  # noqa: BLE001 - shown on the page, the server goes on
            view, error = None, f"internal error ({type(exc).__name__}: {one_line(exc)})"
        with self.lock:
            if e.version != version:  # replaced meanwhile: load the new content next time
                e.status = "pending"
                return
            e.view, e.error = view, error
            e.status = "ready" if view is not None else "failed"
            e.load_s = round(time.perf_counter() - t0, 3)
            e.used = time.monotonic()
            if view is not None and e.recipe is None and e.kind != "bracket":
                e.recipe, note = recipe_from_facts(view.result.facts, view.n_channels)
                e.note = (e.note + "; " if e.note else "") + note
            self.changes += 1
            self._evict()

    def _evict(self) -> None:
        loaded = sorted((x for x in self.entries if x.view is not None), key=lambda x: x.used, reverse=True)
        total = 0
        for x in loaded:
            total += x.view.nbytes()
            if total > self.memory_budget and x.id != self.current:
                x.view, x.status = None, "pending"
                self._forget_advice(x.id)

    def view(self, entry_id, version=None) -> tuple[Entry, View]:
        """The loaded view of an entry (raises :class:`NotReady` or ``KeyError``)."""
        e = self.entry(entry_id)
        with self.lock:
            if version is not None and int(version) != e.version:
                raise KeyError("version")
            e.used = time.monotonic()
            if e.view is None:
                raise NotReady(e.error if e.status == "failed" else f"{e.label} is {e.status}")
            return e, e.view

    # -------------------------------------------------------------- advice
    def _forget_advice(self, entry_id) -> None:
        for k in [k for k in self._advice if k[0] == entry_id]:
            del self._advice[k]

    def advice(self, entry_id, region: str, protect: str | None = None, *, extinctions=()) -> list:
        """What ``polarsky advise --json`` prints for these boxes (cached), then the same
        advice for filters of the ``extinctions`` given (from the same region sums)."""
        from .loaders import advice_for, region_sums

        e, v = self.view(entry_id)
        key = (e.id, e.version, region, protect or None, tuple(extinctions))
        with self.lock:
            if key in self._advice:
                self._advice.move_to_end(key)
                return self._advice[key]
        regions, sums, counts = region_sums(v.result, region, protect or None)
        out = [advice_for(v.result, regions, sums, counts)]
        out += [advice_for(v.result, regions, sums, counts, extinction=er) for er in extinctions]
        with self.lock:
            self._advice[key] = out
            while len(self._advice) > 64:
                self._advice.popitem(last=False)
        return out

    def panel(self, entry_id, region: str, protect: str | None = None) -> dict:
        """Everything the page's advice panel shows, all from library calls."""
        from ..advice.result import advice_text
        from ..conventions import FIELD_CAUTION

        e, _ = self.view(entry_id)
        with self.lock:
            self.region, self.protect = region, (protect or None)
        result = self.advice(entry_id, region, protect)[0]
        filters = []
        if result["extinction_ratio"] is None:
            for r in self.advice(entry_id, region, protect, extinctions=FILTER_ERS)[1:]:
                filters.append({"extinction_ratio": r["extinction_ratio"], "reduction_stops": r["reduction_stops"],
                                "best_angle_deg": r["best_angle_deg"]})
        return {"advice": result, "text": advice_text(result), "filters": filters,
                "command": advise_command(e.recipe, region, protect), "command_note": e.note,
                "entry": e.id, "version": e.version, "safety": FIELD_CAUTION}

    # -------------------------------------------------------------- saving
    def save(self, entry_id, region: str, protect: str | None = None) -> dict:
        """Write the region (and protected region) as mask images and the advice as JSON.

        Into ``OUT/<entry>/advice-NN/`` (a new folder each time), published whole.
        """
        from ..batch.discover import safe_name
        from ..write.jsonio import write_json
        from ..write.masks import write_mask_image
        from ..write.stage import OutputStage
        from .loaders import box_region

        e, v = self.view(entry_id)
        result = dict(self.advice(entry_id, region, protect)[0])
        masks = {"region.png": box_region(region, option="--region").as_mask(v.shape)}
        if protect:
            masks["protect.png"] = box_region(protect, option="--protect").as_mask(v.shape)
        with self._save_lock:
            base = (self.out_dir / safe_name(e.name)).resolve()
            if base.parent != self.out_dir:
                raise InputError(f"cannot save {e.name!r} inside {self.out_dir}")
            k = 1
            while (base / f"advice-{k:02d}").exists():
                k += 1
            target = base / f"advice-{k:02d}"
            with OutputStage(target, command="workbench") as stage:
                for name, m in masks.items():
                    write_mask_image(stage.path(name), m)
                result["outputs"] = ["advice.json", *masks]
                result["command"] = advise_command(e.recipe, region, protect)
                write_json(stage.path("advice.json"), result)
                stage.publish()
        return {"folder": str(target), "outputs": result["outputs"]}

    # -------------------------------------------------------------- the page's state
    def snapshot(self) -> dict:
        with self.lock:
            return {"entries": [e.public() for e in self.entries], "current": self.current, "changes": self.changes,
                    "watch": self.watch, "follow": self.follow, "region": self.region, "protect": self.protect,
                    "out_dir": str(self.out_dir), "messages": self.messages[-5:]}

    def close(self) -> None:
        self._executor.shutdown()
