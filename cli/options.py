"""Click options built from the settings table: one name, one help text, one syntax everywhere.

``@settings_options("read", "estimate")`` adds the options of those groups of
:mod:`polarsky.options.settings` to a command; every option defaults to ``None`` (not given),
so :meth:`polarsky.options.settings.Settings.from_options` can tell what the user set, and the
values are parsed by the table's own parsers (the same as for a batch file or the Python API).
"""

from __future__ import annotations

import dataclasses

import click

from polarsky.conventions import ANGLE_HELP
from polarsky.options.settings import GROUPS, choices_of

__all__ = ["settings_options", "frames_argument", "out_option", "json_option", "pop_settings", "frames_command",
           "emit", "ANGLE_HELP"]


def _click_option(f: dataclasses.Field):
    md = f.metadata
    flag = "--" + f.name.replace("_", "-")
    kw = {"default": None, "help": md["help"], "show_default": False}
    if f.default is not dataclasses.MISSING and f.default not in (None, (), ""):
        shown = ",".join(f"{v:g}" for v in f.default) if isinstance(f.default, tuple) else f.default
        kw["help"] += f" [default: {shown}]" if not isinstance(f.default, bool) else ""
    if md["parse"].__name__ == "boolean":
        return click.option(f"{flag}/--no-{flag[2:]}", f.name, default=None, help=md["help"])
    if md["choices"]:
        kw["type"] = click.Choice(list(choices_of(f)), case_sensitive=False)
    elif md["metavar"]:
        kw["metavar"] = md["metavar"]
    if md.get("flag_value"):  # the option alone means its flag value
        kw.update(is_flag=False, flag_value=md["flag_value"])
    if md["multiple"]:
        kw["multiple"] = True
        kw["default"] = ()
    return click.option(flag, f.name, **kw)


def settings_options(*groups, exclude=()):
    """Click decorator adding the options of the given settings groups (minus ``exclude``)."""
    opts = [_click_option(f) for g in groups for f in dataclasses.fields(GROUPS[g]) if f.name not in exclude]

    def deco(fn):
        for opt in reversed(opts):
            fn = opt(fn)
        return fn
    return deco


def pop_settings(kwargs: dict, *groups, exclude=()) -> dict:
    """Take the settings options of ``groups`` out of a command's keyword arguments."""
    names = [f.name for g in groups for f in dataclasses.fields(GROUPS[g]) if f.name not in exclude]
    return {n: kwargs.pop(n) for n in names if n in kwargs}


def frames_argument(fn):
    """``FRAME...``: frame files (or a stokes.nc where a command accepts one)."""
    return click.argument("frames", nargs=-1, type=click.Path(dir_okay=False, path_type=str))(fn)


def out_option(*, required: bool, help: str):
    """``--out DIR``: the output folder (the same option in every command)."""
    return click.option("--out", "out_dir", required=required, metavar="DIR",
                        type=click.Path(file_okay=False, path_type=str), help=help)


def json_option(fn):
    """``--json``: print one JSON object on stdout and nothing else there."""
    return click.option("--json", "as_json", is_flag=True, help="Print the result as one JSON object on stdout.")(fn)


def emit(result: dict, as_json: bool, show) -> int:
    """Print ``result`` as one JSON object (``--json``) or in words (``show(result)``); exit status 0."""
    if as_json:
        from polarsky.write.jsonio import print_json

        print_json(result)
    else:
        show(result)
    return 0


def frames_command(name: str, *, groups, short_help: str, out_help: str, out_required: bool = True, exclude=(),
                   epilog: str = ANGLE_HELP):
    """Decorator of a command that reads FRAME...: the settings options of ``groups``, ``--out``
    and ``--json``, the same in every such command."""
    def deco(fn):
        fn = json_option(fn)
        fn = out_option(required=out_required, help=out_help)(fn)
        fn = settings_options(*groups, exclude=exclude)(fn)
        fn = frames_argument(fn)
        return click.command(name=name, short_help=short_help, epilog=epilog)(fn)
    return deco
