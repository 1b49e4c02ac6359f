"""Batch settings: a TOML file (read with :mod:`tomllib`) plus command-line options.

The file's tables are the groups of the settings table and its keys the option names, so a
key means what the option of the same name means on the command line, with the same syntax
(see ``docs/batch.md`` and ``docs/glossary.md``)::

    [read]
    angles = "0,45,90,135"         # or [0, 45, 90, 135]: frames grouped by capture time
    transfer = "auto"
    [estimate]
    extinction = 1000.0
    calibration = "cal"            # relative to this file
    [output]
    pictures = true
    [advise]                       # region set -> advice for every bracket
    region = "10,20,200,120"       # or [10, 20, 200, 120], or "mask.png"
    [mosaic]                       # mosaic set -> every frame is one raw polarization-mosaic frame
    mosaic = "90,45;135,0"
    [geometry]                     # with [sky]: a sky comparison for every bracket
    when = "2026-06-21T19:10:00+02:00"
    lat = 46.37
    lon = 9.84
    hfov_deg = 70
    [sky]
    solve = "yaw"
    [discovery]
    time_gap_s = 10.0
    [report]
    embed_images = "auto"
    [cluster]
    workers = 2

Every table and key is checked when the file is read, before any bracket is processed; a
bad one raises :class:`~polarsky.errors.InputError` naming the file, the table and the key.
With a sky comparison, the lens settings and (when time and place are given) the sun's
elevation are checked then too, so a batch set for the night stops before its first bracket.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

from ..errors import InputError
from ..options.settings import GROUPS, Settings, option_names

__all__ = ["BATCH_GROUPS", "load_settings", "sky_requested"]

#: Settings groups a batch file may hold (one TOML table each).
BATCH_GROUPS = ("read", "mosaic", "estimate", "output", "advise", "geometry", "sky", "discovery", "report",
                "cluster")


#: Settings of the table that describe one bracket, not a batch: why they are refused in a batch file.
NOT_IN_BATCH = {"manifest": "each bracket folder holds its own manifest.csv, which discovery reads; remove the key"}


def load_settings(path=None, *, overrides=None) -> tuple:
    """Settings from a batch file (optional) and command-line options (``overrides``).

    Returns
    -------
    settings : Settings
    tables : set of str
        The tables the file holds (``"sky"`` or ``"geometry"`` ask for a sky comparison).
    """
    settings = Settings()
    tables: set = set()
    if path is not None:
        path = Path(path)
        try:
            with open(path, "rb") as fh:
                raw = tomllib.load(fh)
        except FileNotFoundError:
            raise InputError(f"batch settings file {path} does not exist; give an existing .toml file") from None
        except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
            raise InputError(f"batch settings file {path} is not valid TOML ({exc})") from None
        for table, values in raw.items():
            if table not in BATCH_GROUPS or not isinstance(values, dict):
                raise InputError(f"{path}: [{table}] is not a batch settings table; the tables are "
                                 f"{', '.join(f'[{t}]' for t in BATCH_GROUPS)}")
            known = [k for k in option_names(table) if k not in NOT_IN_BATCH]
            for key in values:
                if key in NOT_IN_BATCH:
                    raise InputError(f"{path} [{table}]: {key} cannot be set for a whole batch; {NOT_IN_BATCH[key]}")
                if key not in known:
                    raise InputError(f"{path} [{table}]: unknown key {key!r}; [{table}] holds {', '.join(known)}")
            settings = settings.replace(values, base=path.parent, where=f"{path} [{table}]")
            tables.add(table)
    if overrides:
        settings = settings.replace({k: v for k, v in overrides.items() if v not in (None, ())}, where="")
    if sky_requested(tables):
        from ..tasks.sky import check_sky_settings

        try:
            check_sky_settings(settings)
        except InputError as exc:
            raise InputError(f"{path} [geometry]: {_as_keys(str(exc))}") from None
    return settings, tables


def _as_keys(message: str) -> str:
    """A message of the shared checks with its options written as the keys of a batch file
    (``--fov-deg`` -> ``fov_deg``)."""
    import re

    names = set(option_names())
    return re.sub(r"--([a-z][a-z0-9-]*)",
                  lambda m: m.group(1).replace("-", "_") if m.group(1).replace("-", "_") in names else m.group(0),
                  message)


def sky_requested(tables) -> bool:
    """Whether the batch compares every bracket with the clear-sky model."""
    return bool({"sky", "geometry"} & set(tables))


assert set(BATCH_GROUPS) <= set(GROUPS)
