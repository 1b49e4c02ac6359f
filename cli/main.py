"""The ``polarsky`` console command.

Each sub-command lives in its own module of this package and exposes a click command
named ``command``; :data:`COMMAND_MODULES` lists them.  ``main(args)`` can be called
in-process by tests.  Exit status: 0 success, 1 the job ran but part of it failed
(batch), 2 bad input or usage, with one line ``error: ...`` on stderr.
"""

from __future__ import annotations

import importlib
import os
import sys
import warnings

import click

from polarsky._version import __version__
from polarsky.errors import InputError, PolarskyWarning, one_line

#: Sub-command modules (``cli.<name>`` must define ``command``).
COMMAND_MODULES = [
    "stokes",
    "advise",
    "demo",
    "calibrate",
    "sky",
    "batch",
]


class _Group(click.Group):
    def list_commands(self, ctx):
        return sorted(super().list_commands(ctx))


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="polarsky")
def cli():
    """polarsky: calibrated polarization from polarizer brackets and polarization cameras.

    Angles are degrees in the image plane, from the image's +x axis (to the right)
    counter-clockwise as seen on the displayed image; AoLP is in [0, 180).  If you give
    filter-ring readings instead of absolute angles, recommended angles are ring readings
    on that same scale.
    """


for _name in COMMAND_MODULES:
    _mod = importlib.import_module(f"cli.{_name}")
    cli.add_command(_mod.command)


def _show_warning(message, category, filename, lineno, file=None, line=None):
    prefix = "warning" if issubclass(category, PolarskyWarning) else category.__name__
    print(f"{prefix}: {one_line(message)}", file=sys.stderr)


def main(args=None) -> int:
    """Run the command line with ``args`` (default ``sys.argv[1:]``); return the exit status."""
    old = warnings.showwarning
    warnings.showwarning = _show_warning
    try:
        rv = cli.main(args=args, prog_name="polarsky", standalone_mode=False)
        return int(rv or 0)
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except click.UsageError as exc:
        hint = f" (see 'polarsky {exc.ctx.info_name} --help')" if exc.ctx and exc.ctx.parent else " (see 'polarsky --help')"
        print(f"error: {one_line(exc.format_message())}{hint}", file=sys.stderr)
        return 2
    except click.exceptions.Exit as exc:
        return int(exc.exit_code)
    except click.Abort:
        print("error: aborted", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("error: interrupted", file=sys.stderr)
        return 130
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


def entry() -> None:  # pragma: no cover - thin wrapper
    sys.exit(main())


if __name__ == "__main__":  # pragma: no cover
    entry()
