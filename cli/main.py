"""The ``polarsky`` console command (installed as ``polarsky.cli``).

Each sub-command lives in its own module of this package and exposes a click command named
``command``; :data:`COMMAND_MODULES` lists them and they are imported only when run (so
``polarsky --help`` stays quick).  ``main(args)`` can be called in-process by tests.  Exit
status: 0 success, 1 the job ran but part of it failed (batch), 2 bad input or usage, with
one line ``error: ...`` on stderr.
"""

from __future__ import annotations

import importlib
import os
import signal
import sys
import warnings

import click

from polarsky._version import __version__
from polarsky.errors import InputError, PolarskyWarning, one_line

#: Sub-commands (each the module of this package of the same name) and their one-line
#: summaries for ``polarsky --help``.
COMMAND_MODULES = dict(
    advise="Which way to set the filter, and what it removes.",
    batch="Process every bracket of a folder tree, locally or on dask.",
    calibrate="Make a calibration (flat bench frames, the clear sky, the filter ring's zero).",
    demo="Run polarsky on an invented scene with known truth.",
    plan="Plan a shot before the bracket exists (sky darkening, glare).",
    sky="Compare the sky with the clear-sky model.",
    stokes="Stokes maps, DoLP and AoLP with uncertainties.",
    workbench="A page in your browser: mark the glare, read the angle.",
)


class _LazyGroup(click.Group):
    """Imports a sub-command's module only when that command runs or shows its help."""

    def list_commands(self, ctx):
        return sorted(COMMAND_MODULES)

    def get_command(self, ctx, name):
        if name not in COMMAND_MODULES:
            return None
        return importlib.import_module(f"{__package__}.{name}").command

    def format_commands(self, ctx, formatter):
        rows = [(name, COMMAND_MODULES[name]) for name in self.list_commands(ctx)]
        with formatter.section("Commands"):
            formatter.write_dl(rows)


@click.group(cls=_LazyGroup, context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
@click.version_option(__version__, prog_name="polarsky")
def cli():
    """polarsky: calibrated polarization from filter brackets and polarization cameras.

    Angles are degrees in the image plane, from the image's +x axis (to the right)
    counter-clockwise as seen on the displayed image; AoLP is in [0, 180). If you give
    filter-ring readings instead of absolute angles, recommended angles are ring readings
    on that same scale.
    """


def _show_warning(message, category, filename, lineno, file=None, line=None):
    prefix = "warning" if issubclass(category, PolarskyWarning) else f"warning ({category.__name__})"
    print(f"{prefix}: {one_line(message)}", file=sys.stderr)


def _names_as_given() -> list:
    """Let stdout and stderr print file names that are not UTF-8 as the system gave them
    (Python holds their bytes as lone surrogates, which strict encoding refuses); returns
    what to restore."""
    changed = []
    for stream in (sys.stdout, sys.stderr):
        try:
            old = stream.errors
            stream.reconfigure(errors="surrogateescape")
        except (AttributeError, ValueError, TypeError):
            continue
        changed.append((stream, old))
    return changed


#: What a run stopped by SIGTERM or Ctrl-C says.
INTERRUPTED = "error: interrupted (no output folder was left half-written)"


class _Stopped(BaseException):
    """SIGTERM arrived: unwind (staging folders are removed, outputs stay whole).

    Not a KeyboardInterrupt, which click turns into an abort with an empty line first."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def _terminate(signum, frame):
    raise _Stopped(signum)


def main(args=None) -> int:
    """Run the command line with ``args`` (default ``sys.argv[1:]``); return the exit status."""
    old = warnings.showwarning
    warnings.showwarning = _show_warning
    streams = _names_as_given()
    old_handlers = {}
    if sys.platform != "win32":
        try:  # SIGTERM cleans up as Ctrl-C does: staging folders are removed, outputs stay whole
            old_handlers[signal.SIGTERM] = signal.signal(signal.SIGTERM, _terminate)
        except ValueError:  # not the main thread (tests calling main in a worker)
            pass
    try:
        rv = cli.main(args=args, prog_name="polarsky", standalone_mode=False)
        return int(rv or 0)
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except PolarskyWarning as exc:  # python -W error: a warning became an error
        print(f"error: {one_line(exc)} (warnings are errors in this Python)", file=sys.stderr)
        return 2
    except click.UsageError as exc:
        hint = f" (see 'polarsky {exc.ctx.command_path.split(' ', 1)[-1]} --help')" if exc.ctx and exc.ctx.parent else \
            " (see 'polarsky --help')"
        print(f"error: {one_line(exc.format_message())}{hint}", file=sys.stderr)
        return 2
    except click.exceptions.Exit as exc:
        return int(exc.exit_code)
    except click.Abort as exc:
        if isinstance(exc.__cause__, KeyboardInterrupt):  # Ctrl-C (click has ended the line)
            print(INTERRUPTED, file=sys.stderr)
            return 128 + signal.SIGINT
        print("error: aborted", file=sys.stderr)
        return 2
    except (_Stopped, KeyboardInterrupt) as exc:
        print(INTERRUPTED, file=sys.stderr)
        return 128 + getattr(exc, "signum", signal.SIGINT)
    except MemoryError:
        print("error: out of memory; process smaller frames or raise the machine's memory", file=sys.stderr)
        return 2
    except OSError as exc:
        print(f"error: {one_line(exc)}", file=sys.stderr)
        return 2
    except Exception as exc:  # noqa: BLE001 - a bug: say so in one line, traceback on request
        if os.environ.get("POLARSKY_DEBUG"):
            raise
        print(f"error: internal error ({type(exc).__name__}: {one_line(exc)}); "
              "rerun with POLARSKY_DEBUG=1 for details and please report it", file=sys.stderr)
        return 1
    finally:
        warnings.showwarning = old
        for stream, errors in streams:
            stream.reconfigure(errors=errors)
        for sig, handler in old_handlers.items():
            signal.signal(sig, handler)


def entry() -> None:  # pragma: no cover - thin wrapper
    sys.exit(main())


if __name__ == "__main__":  # pragma: no cover
    entry()
