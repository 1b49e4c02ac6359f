"""``--watch``: follow a folder that a camera or a card reader writes into.

Every ``interval_s`` the folder is grouped into brackets by the batch's rules
(:func:`polarsky.batch.discover.discover_brackets`).  A bracket is taken as complete when
it can be processed (at least three analyzer angles, no duplicate angle, ...) and none of
its files has changed for ``settle_s`` seconds (a file still being copied keeps changing
size).  It is then processed and shown; with a region set on the page, its advice is
computed at once.  A bracket that changes later (a fourth frame arrives) is processed
again.  Files are only read, never moved or changed.
"""

from __future__ import annotations

import threading
import time
from pathlib import Path

from ..errors import InputError, one_line
from .sources import bracket_args

__all__ = ["Watcher"]


def _signature(bracket) -> tuple:
    files = list(bracket.frames) + ([bracket.manifest] if bracket.manifest is not None else [])
    sig = []
    for f in files:
        try:
            st = Path(f).stat()
            sig.append((str(f), st.st_size, st.st_mtime_ns))
        except OSError:
            sig.append((str(f), -1, -1))
    return tuple(sig)


class Watcher:
    """A background thread that adds the new brackets of ``folder`` to ``session``.

    Parameters
    ----------
    session : Session
    folder : path
    settings : Settings
        The bracket options (``angles``: angles of frames grouped by capture time;
        ``time_gap_s``: the gap between capture times that starts a new bracket).
    interval_s, settle_s : float
        Seconds between looks at the folder; seconds a bracket's files must stay unchanged.
    """

    def __init__(self, session, folder, settings, *, interval_s: float = 1.0, settle_s: float = 1.5):
        self.session = session
        self.folder = Path(folder)
        if not self.folder.is_dir():
            raise InputError(f"--watch needs a folder; {folder} is not one")
        self.settings = settings
        self.interval_s = interval_s
        self.settle_s = settle_s
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self._pending: dict = {}   # name -> (signature, first time seen with it)
        self._by_name: dict = {}   # name -> Entry
        self.scans = 0

    def _discover(self):
        from ..batch.runner import list_brackets

        try:
            return list_brackets(self.folder, self.session.out_dir, settings=self.settings)
        except InputError as exc:
            self._message(str(exc))
            return []

    def _message(self, text):
        with self.session.lock:
            if not self.session.messages or self.session.messages[-1] != text:
                self.session.messages.append(text)
                self.session.changes += 1

    def _entry_args(self, b, sig) -> dict:
        args = bracket_args(b, self.settings)
        args["signature"] = sig
        return args

    def start_entries(self) -> None:
        """Add the brackets already in the folder; load the newest one."""
        newest, newest_t = None, -1.0
        for b in self._discover():
            sig = _signature(b)
            e = self.session.add(**self._entry_args(b, sig))
            self._by_name[b.name] = e
            t = max((s[2] for s in sig), default=0)
            if e.status == "pending" and t > newest_t:
                newest, newest_t = e, t
        if newest is not None:
            self.session.select(newest.id)
            self.session.load_now(newest)

    def scan_once(self) -> list:
        """Look at the folder once; process what is complete.  Returns the entries shown."""
        self.scans += 1
        now = time.monotonic()
        shown = []
        for b in self._discover():
            sig = _signature(b)
            e = self._by_name.get(b.name)
            if e is not None and e.signature == sig:
                self._pending.pop(b.name, None)
                continue
            seen = self._pending.get(b.name)
            if seen is None or seen[0] != sig:
                self._pending[b.name] = (sig, now)
                continue
            if now - seen[1] < self.settle_s:
                continue
            if b.problem and e is None and len(b.frames) < 3:
                continue  # a bracket still being shot: wait for its frames
            del self._pending[b.name]
            a = self._entry_args(b, sig)
            if e is None:
                e = self.session.add(**a)
                self._by_name[b.name] = e
            else:
                self.session.replace(e, **{k: v for k, v in a.items() if k not in ("name", "kind")})
            if e.status == "unavailable":
                continue
            self.session.load_now(e)
            if self.session.follow:
                self.session.select(e.id)
            region, protect = self.session.region, self.session.protect
            if region and e.status == "ready":
                try:  # the advice for the kept region is ready when the page asks
                    self.session.panel(e.id, region, protect)
                except InputError as exc:
                    self._message(f"{e.label}: {exc}")
            shown.append(e)
        return shown

    def _run(self) -> None:
        while not self._stop.wait(self.interval_s):
            try:
                self.scan_once()
            except Exception as exc:  # noqa: BLE001 - keep watching; tell the page
                self._message(f"watching {self.folder} failed once: {type(exc).__name__}: {one_line(exc)}")

    def start(self) -> None:
        self._thread = threading.Thread(target=self._run, name="polarsky-watch", daemon=True)
        self._thread.start()

    def stop(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join(timeout=5)
