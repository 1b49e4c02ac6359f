"""Starting and stopping the workbench: what ``polarsky workbench`` runs."""

from __future__ import annotations

import sys
import threading
import time
from pathlib import Path

__all__ = ["run_workbench", "prepare_workbench", "LOOPBACK_HOSTS", "DEFAULT_OUT"]

LOOPBACK_HOSTS = ("127.0.0.1", "localhost", "::1")
#: The output folder when ``--out`` is not given (the only folder the workbench writes into).
DEFAULT_OUT = "polarsky-workbench"


def _say(text, err=False):
    stream = sys.stderr if err else sys.stdout
    print(text, file=stream, flush=True)


def prepare_workbench(paths, out_dir=None, settings=None, *, token: str | None = None, echo=_say,
                      watch_interval_s: float = 1.0, watch_settle_s: float = 1.5, **options):
    """Bind the server, read or process the first entry, and return ``(workbench, watcher)``.

    Nothing is served until :meth:`Workbench.serve` or :meth:`Workbench.start`.

    Parameters
    ----------
    paths : sequence of path
        Frames, result folders or (with ``watch``) one folder to follow.
    out_dir : path, optional
        The only folder the workbench writes into (default :data:`DEFAULT_OUT`).
    settings : polarsky.Settings, optional
    **options
        Any setting by name: the bracket options (``angles``, ``extinction``, ``mosaic``, ...)
        and the workbench's own (``host``, ``port``, ``watch``).

    Raises
    ------
    InputError
        Bad paths, a folder without brackets, a port in use, a bracket that cannot be
        processed (when it is the only thing to show).
    """
    from ..errors import InputError
    from ..tasks._common import resolve_settings
    from .server import Workbench
    from .session import Session
    from .sources import add_paths
    from .watch import Watcher

    settings = resolve_settings(settings, options)
    wb = settings.workbench
    watch = bool(wb.watch)
    paths = [str(p) for p in paths]
    if not paths and settings.read.manifest is None:
        raise InputError("give a bracket's frames, an output folder of 'polarsky stokes' or 'polarsky batch', "
                         "or a folder to --watch")
    if watch and (len(paths) != 1 or not Path(paths[0]).is_dir()):
        raise InputError("--watch follows one folder: give exactly one folder PATH")
    session = Session(out_dir=DEFAULT_OUT if out_dir is None else out_dir, watch=paths[0] if watch else None)
    try:
        workbench = Workbench(session, host=wb.host, port=wb.port, token=token)
    except BaseException:
        session.close()
        raise
    watcher = None
    try:
        t0 = time.perf_counter()
        if watch:
            watcher = Watcher(session, paths[0], settings, interval_s=watch_interval_s, settle_s=watch_settle_s)
            watcher.start_entries()
        else:
            add_paths(session, paths, settings)
            if session.current is not None:
                session.load_now(session.entry(session.current))
        shown = [e for e in session.entries if e.status != "unavailable"]
        if session.current is not None:
            e = session.entry(session.current)
            if e.status == "failed":
                if len(shown) <= 1 and not watch:
                    raise InputError(e.error or f"{e.label} could not be loaded")
                echo(f"warning: {e.label}: {e.error}", err=True)
            else:
                h, w = e.view.shape
                echo(f"polarsky workbench: {e.label} ready in {time.perf_counter() - t0:.2f} s "
                     f"({w}x{h} px, {','.join(e.view.channels)})")
                for text in e.view.warnings:
                    echo(f"warning: {text}", err=True)
        elif not watch:
            problems = "; ".join(f"{e.label}: {e.error}" for e in session.entries[:3])
            raise InputError(f"nothing here can be shown ({problems})")
        if len(session.entries) > 1:
            echo(f"{len(shown)} of {len(session.entries)} brackets/results can be shown; pick them on the page")
    except BaseException:
        workbench.sock.close()
        session.close()
        raise
    return workbench, watcher


def run_workbench(paths, out_dir=None, settings=None, **options) -> int:
    """``polarsky workbench``: serve the page until Ctrl-C; returns the exit status (0).

    Parameters as for :func:`prepare_workbench`; ``browser`` (a setting) opens the page.
    """
    from ..tasks._common import resolve_settings

    settings = resolve_settings(settings, options)
    host = settings.workbench.host
    if host not in LOOPBACK_HOSTS:
        _say(f"warning: --host {host} makes the workbench reachable from other machines; anyone who gets its "
             "address with the token can see these results and save into the output folder", err=True)
    workbench, watcher = prepare_workbench(paths, out_dir, settings)
    try:  # Ctrl-C at any moment from the printed address on stops the workbench cleanly
        _say(f"open {workbench.url}")
        _say(f"saves go to {workbench.session.out_dir}; Ctrl-C stops the workbench")
        if watcher is not None:
            _say(f"watching {Path(paths[0]).resolve()} for new brackets")
            watcher.start()
        if settings.workbench.browser:
            threading.Thread(target=_open_page, args=(workbench,), daemon=True).start()
        workbench.serve()
    except KeyboardInterrupt:
        pass
    finally:
        if watcher is not None:
            watcher.stop()
        workbench.sock.close()
        workbench.session.close()
    _say("workbench stopped")
    return 0


def _open_page(workbench) -> None:
    """Open the page in the default browser once the server answers."""
    while not workbench.server.started and not workbench.server.should_exit:
        time.sleep(0.05)
    if workbench.server.started:
        import webbrowser

        webbrowser.open(workbench.url)
