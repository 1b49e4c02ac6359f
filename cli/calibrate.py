"""``polarsky calibrate``: make analyzer calibration files (CAL.nc).

Each kind of calibration is a sub-command in its own module, listed in
:data:`CALIBRATE_MODULES` (``cli.<name>`` must define ``command``).
"""

from __future__ import annotations

import importlib

import click

#: Modules that define the calibrate sub-commands.
CALIBRATE_MODULES: list[str] = [
    "calibrate_flat",
    "calibrate_sky",
]


@click.group(name="calibrate")
def command():
    """Make a calibration file (CAL.nc) for 'polarsky stokes --calibration'."""


for _name in CALIBRATE_MODULES:
    command.add_command(importlib.import_module(f"cli.{_name}").command)
