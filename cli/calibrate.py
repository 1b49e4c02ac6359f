"""``polarsky calibrate``: make calibration files (``DIR/calibration.nc``).

Each kind of calibration is a sub-command in its own module, listed in
:data:`CALIBRATE_MODULES` (``polarsky.cli.<name>`` must define ``command``).
"""

from __future__ import annotations

import importlib

import click

#: Modules that define the calibrate sub-commands.
CALIBRATE_MODULES: list[str] = [
    "calibrate_flat",
    "calibrate_sky",
    "calibrate_ring",
    "calibrate_response",
]


@click.group(name="calibrate", short_help="Make a calibration (flat bench frames, clear sky, filter ring, camera response).")
def command():
    """Make a calibration folder (calibration.nc, calibration.json) for '--calibration DIR'."""


for _name in CALIBRATE_MODULES:
    command.add_command(importlib.import_module(f"{__package__}.{_name}").command)
